using System.Security.Cryptography;
using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Features;
using Assay.ML;
using Assay.Model;
using Assay.Output;
using Assay.Tests.Support;
using Microsoft.ML;
using Microsoft.ML.Data;
using Xunit.Abstractions;

namespace Assay.Tests.ML;

/// <summary>
/// A train and a test run of the bundled WordNet task (every 16th training row and every 8th test row of each label, and the first 3 of each, as the bundled study takes its rows) with the
/// bundled demo model: the last hidden state, Φp and the top-5 next tokens after the task's prompt.
/// </summary>
public sealed class BundledTaskRuns : IDisposable
{
    private readonly TempFolder _temp = new();

    public BundledTaskRuns()
    {
        Model = LanguageModel.Open(ModelOption.DefaultFolder);
        string task = Path.Combine(Tests.Model.WeightsManifestPinTests.RepositoryRoot(), "src", "Assay.Cli", "tasks", "wordnet-supersense");
        Options = new ExtractionOptions
        {
            Prompt = PromptTemplate.Parse("{text} It is a kind of"),
            Features = [new HiddenStateFeature(-1), new ConditionalMeanFeature(), new TopTokensFeature(5)],
        };
        TestLines = EveryNth(Path.Combine(task, "test.jsonl"), 8);
        File.WriteAllLines(_temp.File("train.jsonl"), EveryNth(Path.Combine(task, "train.jsonl"), 16));
        File.WriteAllLines(_temp.File("test.jsonl"), TestLines);
        ExtractionRun.Execute(Model, _temp.File("train.jsonl"), Train, new RunOptions { Extraction = Options });
        ExtractionRun.Execute(Model, _temp.File("test.jsonl"), Test, new RunOptions { Extraction = Options });
    }

    public LanguageModel Model { get; }

    /// <summary>Every <paramref name="every"/>th row of each label, and the first 3 of every label, so 3-fold cross-validation sees each class.</summary>
    private static List<string> EveryNth(string path, int every)
    {
        var seen = new Dictionary<string, int>();
        return [.. File.ReadLines(path).Where(line =>
        {
            string label = JsonDocument.Parse(line).RootElement.GetProperty("label").GetString()!;
            int n = seen[label] = seen.GetValueOrDefault(label) + 1;
            return n % every == 1 || n <= 3;
        })];
    }

    public ExtractionOptions Options { get; }

    public IReadOnlyList<string> TestLines { get; }

    public string Train => _temp.File("train");

    public string Test => _temp.File("test");

    public string Folder(string name) => _temp.File(name);

    public void Dispose() => _temp.Dispose();
}

public sealed class DataViewTests(BundledTaskRuns runs, ITestOutputHelper output) : IClassFixture<BundledTaskRuns>
{
    [Fact]
    public void Run_folder_view_holds_every_feature_file_as_numpy_reads_it()
    {
        RunFolderDataView view = new MLContext(seed: 1).Data.LoadFromRunFolder(runs.Test);
        // Outside reference: numpy's np.load and Python's csv module (tests/Assay.Tests/Reference/run_columns_numpy.py).
        using JsonDocument numpy = JsonDocument.Parse(PythonReference.Run("run_columns_numpy.py", runs.Test));
        string[] stems = [.. numpy.RootElement.EnumerateObject().Select(p => p.Name).Where(n => n != "rows.csv")];
        Assert.Equal(["Id", "Label", .. stems.Order(StringComparer.Ordinal)], view.Schema.Select(c => c.Name).Take(2).Concat(view.Schema.Skip(2).Select(c => c.Name).Order(StringComparer.Ordinal)));
        Assert.Equal(runs.TestLines.Count, view.GetRowCount());
        Dictionary<string, string> digests = Digests(view);
        foreach (string stem in stems)
        {
            JsonElement file = numpy.RootElement.GetProperty(stem);
            Assert.Equal(file.GetProperty("shape")[1].GetInt32(), ((VectorDataViewType)view.Schema[stem].Type).Size);
            Assert.Equal(file.GetProperty("sha256").GetString(), digests[stem]);
        }
        JsonElement rows = numpy.RootElement.GetProperty("rows.csv");
        Assert.Equal(rows.GetProperty("ids").GetString(), digests["Id"]);
        Assert.Equal(rows.GetProperty("labels").GetString(), digests["Label"]);
    }

    [Fact]
    public void A_shuffled_cursor_gives_every_row_once_with_its_own_values()
    {
        RunFolderDataView view = RunFolderDataView.Load(runs.Test, "cmean");
        Dictionary<string, float[]> inOrder = Rows(view, null);
        Dictionary<string, float[]> shuffled = Rows(view, new Random(7));
        Assert.Equal(inOrder.Count, shuffled.Count);
        Assert.All(inOrder, kv => Assert.Equal(kv.Value, shuffled[kv.Key]));
        Assert.NotEqual(inOrder.Keys, shuffled.Keys);
    }

    [Fact]
    public void Extractor_view_streams_the_run_folders_rows_bit_for_bit()
    {
        var extractor = new FeatureExtractor(runs.Model, runs.Options);
        string[] texts = [.. runs.TestLines.Select(l => JsonDocument.Parse(l).RootElement.GetProperty("text").GetString()!)];
        string[] labels = [.. runs.TestLines.Select(l => JsonDocument.Parse(l).RootElement.GetProperty("label").GetString()!)];
        ExtractionDataView streamed = new MLContext(seed: 1).Data.LoadFromExtractor(extractor, texts, labels);
        RunFolderDataView stored = RunFolderDataView.Load(runs.Test);
        Assert.Equal(["Text", "Label", .. extractor.Outputs.Select(o => o.Name)], streamed.Schema.Select(c => c.Name));
        Assert.Equal(texts.Length, streamed.GetRowCount());
        Assert.Null(new ExtractionDataView(extractor, texts.Where(_ => true)).GetRowCount());
        // One pass over the streamed view runs the model once.
        Dictionary<string, string> fromStream = Digests(streamed), fromRun = Digests(stored);
        Assert.All(extractor.Outputs.Select(o => o.Name).Append("Label"), name => Assert.Equal(fromRun[name], fromStream[name]));
        Assert.Equal(TextDigest(texts), fromStream["Text"]);
    }

    [Fact]
    public void An_ML_NET_trainer_on_the_bundled_task_scores_inside_the_probe_interval()
    {
        // assay probe on the same rows: accuracy and its bootstrap interval (its metrics are checked against
        // scikit-learn in ProbeCommandTests).
        string probe = runs.Folder("probe");
        Assert.Equal(0, ProbeCommand.Run(runs.Train, null, runs.Test, "cmean", probe, 3, "0.1,1,10", TextWriter.Null));
        using JsonDocument report = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(probe, "report.json")));
        JsonElement test = report.RootElement.GetProperty("test");
        double low = test.GetProperty("accuracy_95")[0].GetDouble(), high = test.GetProperty("accuracy_95")[1].GetDouble();
        double c = report.RootElement.GetProperty("c").GetDouble();
        using JsonDocument saved = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(probe, "probe.json")));
        int classes = saved.RootElement.GetProperty("classes").GetArrayLength();

        // ML.NET's multinomial logistic regression (L-BFGS) on standardized features, L2 weight 1/C.
        var ml = new MLContext(seed: 1);
        var pipeline = ml.Transforms.Conversion.MapValueToKey("Label")
            .Append(ml.Transforms.NormalizeMeanVariance("cmean", fixZero: false))
            .Append(ml.MulticlassClassification.Trainers.LbfgsMaximumEntropy("Label", "cmean", l1Regularization: 0, l2Regularization: (float)(1 / c)));
        var model = pipeline.Fit(ml.Data.LoadFromRunFolder(runs.Train, "cmean"));
        MulticlassClassificationMetrics metrics = ml.MulticlassClassification.Evaluate(model.Transform(ml.Data.LoadFromRunFolder(runs.Test, "cmean")));
        output.WriteLine($"assay probe {test.GetProperty("accuracy").GetDouble():F4} [{low:F4}, {high:F4}] at C = {c}; ML.NET {metrics.MicroAccuracy:F4} on {test.GetProperty("rows").GetInt32()} test rows");
        Assert.InRange(metrics.MicroAccuracy, low, high);
        // Far above chance: the view's labels line up with its features.
        Assert.True(metrics.MicroAccuracy > 3.0 / classes, $"accuracy {metrics.MicroAccuracy} over {classes} classes");
    }

    [Fact]
    public void Bad_requests_name_the_problem()
    {
        Assert.Contains("it has cmean", Assert.Throws<RunFolderException>(() => RunFolderDataView.Load(runs.Test, "hidden:2")).Message, StringComparison.Ordinal);
        Assert.Contains("no finished run", Assert.Throws<RunFolderException>(() => RunFolderDataView.Load(runs.Folder("nothing"))).Message, StringComparison.Ordinal);
        RunFolderDataView view = RunFolderDataView.Load(runs.Test, "cmean");
        using (DataViewRowCursor cursor = view.GetRowCursor(view.Schema))
        {
            Assert.Contains("not on a row", Assert.Throws<InvalidOperationException>(() => Read<float>(cursor, "cmean")).Message, StringComparison.Ordinal);
            Assert.True(cursor.MoveNext());
            Assert.Contains("read it as VBuffer<Single>, not VBuffer<Int32>", Assert.Throws<InvalidOperationException>(() => cursor.GetGetter<VBuffer<int>>(view.Schema["cmean"])).Message, StringComparison.Ordinal);
        }
        using (DataViewRowCursor cursor = view.GetRowCursor([]))
        {
            Assert.Contains("was not asked for", Assert.Throws<InvalidOperationException>(() => cursor.GetGetter<VBuffer<float>>(view.Schema["cmean"])).Message, StringComparison.Ordinal);
        }
        var extractor = new FeatureExtractor(runs.Model, runs.Options);
        var short_ = new ExtractionDataView(extractor, ["a", "b"], ["x"]);
        using DataViewRowCursor c = short_.GetRowCursor(short_.Schema);
        Assert.Contains("give one label per text", Assert.Throws<ArgumentException>(() => c.MoveNext()).Message, StringComparison.Ordinal);
    }

    private static float[] Read<T>(DataViewRowCursor cursor, string column)
    {
        VBuffer<float> v = default;
        cursor.GetGetter<VBuffer<float>>(cursor.Schema[column])(ref v);
        return v.DenseValues().ToArray();
    }

    private static Dictionary<string, float[]> Rows(RunFolderDataView view, Random? rand)
    {
        var rows = new Dictionary<string, float[]>();
        using DataViewRowCursor cursor = view.GetRowCursor(view.Schema, rand);
        ValueGetter<ReadOnlyMemory<char>> id = cursor.GetGetter<ReadOnlyMemory<char>>(view.Schema["Id"]);
        while (cursor.MoveNext())
        {
            ReadOnlyMemory<char> value = default;
            id(ref value);
            rows.Add(value.ToString(), Read<float>(cursor, "cmean"));
        }
        return rows;
    }

    /// <summary>
    /// SHA-256 of every column, read in one pass: a vector column's values row after row as little-endian bytes, a
    /// text column's values joined with newlines (UTF-8), as run_columns_numpy.py hashes them.
    /// </summary>
    private static Dictionary<string, string> Digests(IDataView view)
    {
        using DataViewRowCursor cursor = view.GetRowCursor(view.Schema);
        var hashes = view.Schema.ToDictionary(c => c.Name, _ => IncrementalHash.CreateHash(HashAlgorithmName.SHA256));
        var read = new List<Action<bool>>();
        foreach (DataViewSchema.Column column in view.Schema)
        {
            IncrementalHash sha = hashes[column.Name];
            if (column.Type is TextDataViewType)
            {
                ValueGetter<ReadOnlyMemory<char>> get = cursor.GetGetter<ReadOnlyMemory<char>>(column);
                ReadOnlyMemory<char> v = default;
                read.Add(first =>
                {
                    get(ref v);
                    sha.AppendData(System.Text.Encoding.UTF8.GetBytes((first ? "" : "\n") + v.ToString()));
                });
            }
            else if (((VectorDataViewType)column.Type).ItemType == NumberDataViewType.Int32)
            {
                read.Add(VectorReader<int>(cursor, column, sha));
            }
            else
            {
                read.Add(VectorReader<float>(cursor, column, sha));
            }
        }
        bool atFirst = true;
        while (cursor.MoveNext())
        {
            read.ForEach(r => r(atFirst));
            atFirst = false;
        }
        return hashes.ToDictionary(h => h.Key, h =>
        {
            using IncrementalHash sha = h.Value;
            return Convert.ToHexStringLower(sha.GetHashAndReset());
        });
    }

    private static Action<bool> VectorReader<T>(DataViewRowCursor cursor, DataViewSchema.Column column, IncrementalHash sha) where T : unmanaged
    {
        ValueGetter<VBuffer<T>> get = cursor.GetGetter<VBuffer<T>>(column);
        VBuffer<T> v = default;
        return _ =>
        {
            get(ref v);
            sha.AppendData(System.Runtime.InteropServices.MemoryMarshal.AsBytes(v.DenseValues().ToArray().AsSpan()));
        };
    }

    private static string TextDigest(IEnumerable<string> texts) =>
        Convert.ToHexStringLower(SHA256.HashData(System.Text.Encoding.UTF8.GetBytes(string.Join("\n", texts))));
}

using System.Globalization;
using System.Text.Json;
using Assay.Cli.Commands;
using Assay.Config;
using Assay.Fixtures;
using Assay.Model;
using Assay.Tests.Cli;
using Assay.Tests.Features;
using Assay.Tests.Support;
using Assay.Weights;

namespace Assay.Tests.Model;

/// <summary>--weights auto (the storage a checkpoint's dtypes call for) and the memory check before loading.</summary>
public sealed class WeightStorageTests : IDisposable
{
    private readonly TempFolder _temp = new();

    public void Dispose() => _temp.Dispose();

    [Theory]
    [InlineData("F32", WeightPrecision.Binary32)]
    [InlineData("F16", WeightPrecision.Binary32)]
    [InlineData("BF16", WeightPrecision.BFloat16)]
    public void Auto_keeps_bf16_in_bfloat16_and_widens_the_rest_to_float32(string dtype, WeightPrecision expected)
    {
        string folder = Checkpoints.Folder(FeatureExtractorTests.Spec with { DType = dtype });
        using (SafetensorsCheckpoint checkpoint = SafetensorsCheckpoint.Open(folder))
        {
            Assert.Equal(expected, LanguageModel.AutomaticPrecision(checkpoint, ModelConfig.Load(Path.Combine(folder, "config.json"))));
        }
        LanguageModel auto = LanguageModel.Open(folder, null, 4096);
        Assert.Equal(expected, auto.Precision);
        // Either way nothing is lost: the stored values are exactly what the chosen storage holds (F16 and BF16 widen
        // to float32 exactly, common practice), so auto gives the same logits as float32 to the bit.
        int[][] sequences = [[5, 9, 13, 200, 7], [42]];
        ForwardResult a = auto.Forward(sequences), f = LanguageModel.Open(folder, WeightPrecision.Binary32).Forward(sequences);
        for (int s = 0; s < sequences.Length; s++)
        {
            Assert.Equal(f.LastLogits(s).ToArray(), a.LastLogits(s).ToArray());
        }
    }

    [Fact]
    public void A_model_that_would_not_fit_is_refused_before_loading_with_the_figures()
    {
        string folder = Checkpoints.Folder(FeatureExtractorTests.Spec);
        ModelConfig config = ModelConfig.Load(Path.Combine(folder, "config.json"));
        long needed = LanguageModel.WeightBytesFor(config, WeightPrecision.Binary32) + LanguageModel.ActivationBytesFor(config, 512);
        var e = Assert.Throws<ModelMemoryException>(() => LanguageModel.Open(folder, WeightPrecision.Binary32, 512, needed - 1));
        Assert.Equal(needed, e.NeededBytes);
        Assert.Equal(needed - 1, e.AvailableBytes);
        Assert.Equal(Path.Combine(folder, "config.json"), e.FilePath);
        Assert.Contains("in float32 needs an estimated", e.Message, StringComparison.Ordinal);
        Assert.Contains("activations for 512 tokens", e.Message, StringComparison.Ordinal);
        Assert.Contains("available; choose a smaller --weights storage or --token-budget", e.Message, StringComparison.Ordinal);
        // Exactly enough opens; a smaller storage or budget brings the estimate down.
        Assert.Equal(WeightPrecision.Binary32, LanguageModel.Open(folder, WeightPrecision.Binary32, 512, needed).Precision);
        Assert.True(LanguageModel.WeightBytesFor(config, WeightPrecision.Integer8) < LanguageModel.WeightBytesFor(config, WeightPrecision.Binary32));
        Assert.True(LanguageModel.ActivationBytesFor(config, 256) < LanguageModel.ActivationBytesFor(config, 512));
    }

    /// <summary>
    /// The estimate against what the forward pass holds: the logits of every position alone are T·V floats (common
    /// practice), and the estimate covers them and the residual stream's 2·T·d.
    /// </summary>
    [Fact]
    public void The_activation_estimate_covers_the_buffers_of_a_pass()
    {
        ModelConfig config = ModelConfig.Load(Path.Combine(Checkpoints.Folder(ForwardParityTests.Families["llama-gqa-width60"]), "config.json"));
        const int T = 1000;
        long floor = 4L * T * (config.VocabularySize + (2L * config.Width) + (3L * config.InnerWidth));
        Assert.True(LanguageModel.ActivationBytesFor(config, T) >= floor);
    }

    /// <summary>The available memory is positive and at most the kernel's MemTotal (/proc/meminfo, the outside figure).</summary>
    [Fact]
    public void Available_memory_is_read_from_the_kernel()
    {
        string line = File.ReadLines("/proc/meminfo").First(l => l.StartsWith("MemTotal:", StringComparison.Ordinal));
        long total = long.Parse(line["MemTotal:".Length..].Replace("kB", "", StringComparison.Ordinal).Trim(), CultureInfo.InvariantCulture) * 1024;
        long? available = LanguageModel.AvailableMemoryBytes();
        Assert.NotNull(available);
        Assert.InRange(available.Value, 1, total);
    }

    [Fact]
    public void Extract_says_which_storage_auto_took_and_records_it()
    {
        string input = Output.ExtractionRunTests.WriteInput(_temp, 4);
        var err = new StringWriter();
        var request = ExtractCommandTests.Request(input, _temp.File("run"), "cmean", weights: "auto") with
        {
            Model = Checkpoints.Folder(FeatureExtractorTests.Spec with { DType = "BF16" }),
        };
        Assert.Equal(0, ExtractCommand.Run(request, TextWriter.Null, err, CancellationToken.None));
        Assert.Contains("assay: weights bfloat16 (--weights auto: every matrix of the checkpoint is stored in BF16, which loses nothing)", err.ToString(), StringComparison.Ordinal);
        using JsonDocument record = JsonDocument.Parse(File.ReadAllText(_temp.File("run/record.json")));
        Assert.Equal("bfloat16", record.RootElement.GetProperty("settings").GetProperty("model").GetProperty("weights").GetString());
    }

    [Fact]
    public void Int8_names_its_integer_path_on_stderr()
    {
        string input = Output.ExtractionRunTests.WriteInput(_temp, 4);
        var err = new StringWriter();
        var request = ExtractCommandTests.Request(input, _temp.File("run"), "cmean", weights: "int8");
        Assert.Equal(0, ExtractCommand.Run(request, TextWriter.Null, err, CancellationToken.None));
        Assert.Contains(LanguageModel.Int8Kernels == Assay.Kernels.Int8Kernel.Scalar ? "int8 products run on the scalar path" : $"int8 products on the {LanguageModel.Int8Kernels} path",
            err.ToString(), StringComparison.Ordinal);
        using JsonDocument record = JsonDocument.Parse(File.ReadAllText(_temp.File("run/record.json")));
        Assert.Equal(LanguageModel.Int8Kernels.ToString(), record.RootElement.GetProperty("settings").GetProperty("int8_kernels").GetString());
    }

    [Fact]
    public void Bfloat16_asked_of_a_float16_checkpoint_warns_of_the_lost_bits()
    {
        string input = Output.ExtractionRunTests.WriteInput(_temp, 4);
        var err = new StringWriter();
        var request = ExtractCommandTests.Request(input, _temp.File("run"), "cmean", weights: "bfloat16") with
        {
            Model = Checkpoints.Folder(FeatureExtractorTests.Spec with { DType = "F16" }),
        };
        Assert.Equal(0, ExtractCommand.Run(request, TextWriter.Null, err, CancellationToken.None));
        Assert.Contains("warning: --weights bfloat16 rounds this float16 checkpoint's matrices to 7 mantissa bits from 10", err.ToString(), StringComparison.Ordinal);
    }
}

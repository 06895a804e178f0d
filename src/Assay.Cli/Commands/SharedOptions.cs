using System.CommandLine;
using Assay.Features;
using Assay.Input;
using Assay.Weights;

namespace Assay.Cli.Commands;

/// <summary>How a command runs the model, as every model command spells it: --weights, --threads, and for
/// commands that fill a prompt --token-budget, --keep and --no-leading-space.</summary>
internal sealed record ModelRun(string Weights = "auto", int Threads = 0, int TokenBudget = 4096, string Keep = "head", bool LeadingSpace = true,
    string Bos = "auto")
{
    /// <summary>The --bos policy (after <see cref="Validate"/>).</summary>
    public Tokenization.BeginningOfSequence BeginningOfSequence => Spellings.Parse<Tokenization.BeginningOfSequence>("--bos", Bos);

    /// <summary>Checks every value, naming its option, before anything is opened; gives the weight storage (null: auto).</summary>
    public WeightPrecision? Validate()
    {
        ExtractCommand.Positive("--token-budget", TokenBudget);
        if (Threads < 0)
        {
            throw new ArgumentException(string.Create(System.Globalization.CultureInfo.InvariantCulture, $"--threads {Threads}: expected 0 (all cores) or a positive count"));
        }
        _ = Spellings.Parse<TextTruncation>("--keep", Keep);
        _ = BeginningOfSequence;
        return ModelOption.ParseWeights(Weights);
    }

    /// <summary>
    /// Validates, then opens the model in the chosen storage after the memory check, and says on
    /// <paramref name="err"/> when the storage is not the float32 reference by the user's word: auto keeping a BF16
    /// checkpoint in bfloat16, or bfloat16 asked of a float16 checkpoint, which drops three mantissa bits.
    /// </summary>
    public Model.LanguageModel Open(string folder, TextWriter err)
    {
        WeightPrecision? asked = Validate();
        Model.LanguageModel model = Model.LanguageModel.Open(folder, asked, TokenBudget);
        string storage = Assay.Spellings.Of(model.Precision);
        if (asked is null && model.Precision == WeightPrecision.BFloat16)
        {
            // Said only when auto leaves the float32 reference (exactly: the matrices are BF16 to begin with); record.json names the storage either way.
            err.WriteLine($"assay: weights {storage} (--weights auto: every matrix of the checkpoint is stored in BF16, which loses nothing)");
        }
        else if (asked == WeightPrecision.BFloat16 && StoresFloat16(folder, model.Config))
        {
            err.WriteLine("assay: warning: --weights bfloat16 rounds this float16 checkpoint's matrices to 7 mantissa bits from 10 (three fewer); features drift (README: weight storage); --weights auto keeps them exact in float32");
        }
        if (model.Precision == WeightPrecision.Integer8)
        {
            // The integer path is named so a slow fallback never hides (record.json has it as int8_kernels).
            Kernels.Int8Kernel path = Model.LanguageModel.Int8Kernels;
            err.WriteLine(path == Kernels.Int8Kernel.Scalar
                ? "assay: warning: int8 products run on the scalar path (no vector integer path on this CPU or under ASSAY_KERNELS): expect it tens of times slower than float32"
                : $"assay: int8 products on the {path} path");
        }
        return model;
    }

    private static bool StoresFloat16(string folder, Config.ModelConfig config)
    {
        using SafetensorsCheckpoint checkpoint = SafetensorsCheckpoint.Open(folder);
        return Model.LanguageModel.MatrixTypes(checkpoint, config).Contains(TensorDType.F16);
    }

    /// <summary>The extraction options these give (after <see cref="Validate"/>).</summary>
    public ExtractionOptions Extraction(PromptTemplate prompt, IReadOnlyList<FeatureRequest> features) => new()
    {
        Prompt = prompt,
        Features = features,
        Truncation = Spellings.Parse<TextTruncation>("--keep", Keep),
        LeadingSpace = LeadingSpace,
        BeginningOfSequence = BeginningOfSequence,
        TokenBudget = TokenBudget,
        MaxThreads = Threads,
    };
}

/// <summary>The options every model command shares, made once so they read and default alike everywhere.</summary>
internal sealed class SharedOptions
{
    /// <summary>A text input argument's path: "-" stays standard input (a file named "-" is ./-), anything else in full.</summary>
    public static string InputPath(FileInfo input) => input.ToString() == Assay.Input.TextInputReader.StandardInput ? Assay.Input.TextInputReader.StandardInput : input.FullName;

    public Option<string> Weights { get; } = ModelOption.CreateWeights();

    public Option<int> Threads { get; } = new("--threads") { Description = "Worker threads; 0 = all cores. Outputs do not depend on it.", DefaultValueFactory = _ => 0 };

    public Option<int> TokenBudget { get; } = new("--token-budget") { Description = "Tokens per forward pass.", DefaultValueFactory = _ => new ExtractionOptions().TokenBudget };

    public Option<string> Keep { get; } = new("--keep") { Description = "Which end of an over-long text to keep: head or tail. The prompt is never cut.", DefaultValueFactory = _ => "head" };

    public Option<bool> NoLeadingSpace { get; } = new("--no-leading-space") { Description = "Score words and completions exactly as written, without a space before them." };

    public Option<string> Bos { get; } = new("--bos")
    {
        Description = "Start each sequence with the tokenizer's beginning-of-sequence token: auto (as tokenizer_config.json says), always or never.",
        DefaultValueFactory = _ => "auto",
    };

    public Option<string> Format { get; } = new("--format") { Description = "auto, lines, jsonl, csv or tsv.", DefaultValueFactory = _ => "auto" };

    public Option<string> TextField { get; } = new("--text-field") { Description = "JSONL field or CSV column of the text.", DefaultValueFactory = _ => "text" };

    public Option<string> IdField { get; } = new("--id-field") { Description = "Field of the row id; when given, records without it are rejected (default: id if present, else the line number)." };

    public Option<string> LabelField { get; } = new("--label-field") { Description = "Field of the label; when given, records without it are rejected (default: label if present)." };

    /// <summary>Adds --weights, --threads and --bos, and with <paramref name="prompted"/> --token-budget, --keep and --no-leading-space.</summary>
    public void AddModel(Command command, bool prompted)
    {
        command.Options.Add(Weights);
        command.Options.Add(Threads);
        command.Options.Add(Bos);
        if (prompted)
        {
            command.Options.Add(TokenBudget);
            command.Options.Add(Keep);
            command.Options.Add(NoLeadingSpace);
        }
    }

    /// <summary>Adds --format and --text-field, and with <paramref name="fields"/> --id-field and --label-field.</summary>
    public void AddInput(Command command, bool fields)
    {
        command.Options.Add(Format);
        command.Options.Add(TextField);
        if (fields)
        {
            command.Options.Add(IdField);
            command.Options.Add(LabelField);
        }
    }

    /// <summary>The command's values; the prompt options keep their defaults on commands that do not take them.</summary>
    public ModelRun Model(ParseResult r)
    {
        var run = new ModelRun(r.GetValue(Weights)!, r.GetValue(Threads), Bos: r.GetValue(Bos)!);
        return r.CommandResult.Command.Options.Contains(TokenBudget)
            ? run with { TokenBudget = r.GetValue(TokenBudget), Keep = r.GetValue(Keep)!, LeadingSpace = !r.GetValue(NoLeadingSpace) }
            : run;
    }

    /// <summary>The input fields; a label is required where <paramref name="labelRequired"/>, else only when --label-field is given.</summary>
    public InputFields Fields(ParseResult r, bool labelRequired = false)
    {
        string? id = r.GetValue(IdField), label = r.GetValue(LabelField);
        return new InputFields
        {
            Text = r.GetValue(TextField)!,
            Id = id ?? "id",
            IdRequired = id != null,
            Label = label ?? "label",
            LabelRequired = labelRequired || label != null,
        };
    }
}

// Extracts the last-token hidden state and the conditional-mean feature of each line of a text file (or of three
// built-in definitions) with the bundled demo model, and prints their first values. Ctrl+C stops it cleanly.
//
//   dotnet run -- [TEXTS.txt]
using Assay;
using Assay.Features;
using Assay.Model;

string[] texts = args.Length > 0
    ? File.ReadAllLines(args[0])
    : ["a domesticated carnivorous mammal that typically has a long snout", "a small boat propelled by oars", "a sudden loud noise"];

using var stop = new CancellationTokenSource();
Console.CancelKeyPress += (_, e) => { e.Cancel = true; stop.Cancel(); };
try
{
    LanguageModel model = LanguageModel.Open(BundledModel.Locate());
    var extractor = new FeatureExtractor(model, new ExtractionOptions
    {
        Prompt = PromptTemplate.Parse("{text} It is a kind of"),
        Features = [new HiddenStateFeature(-1), new ConditionalMeanFeature()],
    });
    var progress = new Progress<ExtractionProgress>(p => Console.Error.WriteLine($"{p.Rows} rows, {p.Tokens} tokens, {p.Elapsed.TotalSeconds:F1} s"));
    Console.WriteLine($"{model.Config.Family}, {model.Config.Layers} layers, width {model.Config.Width}; outputs: {string.Join(", ", extractor.Outputs.Select(o => $"{o.Name} ({o.Width})"))}");
    await foreach (FeatureRow row in extractor.ExtractAsync(texts.ToAsyncEnumerable(), progress, stop.Token))
    {
        string Head(int output) => string.Join(" ", row.Values(output)[..3].ToArray().Select(v => v.ToString("F4", System.Globalization.CultureInfo.InvariantCulture)));
        Console.WriteLine($"row {row.Index}: {row.TokenCount} tokens; {extractor.Outputs[0].Name} {Head(0)} …; {extractor.Outputs[1].Name} {Head(1)} …");
    }
    return 0;
}
catch (OperationCanceledException)
{
    Console.Error.WriteLine("stopped");
    return 130;
}
catch (Exception e) when (e is InvalidInputException or DirectoryNotFoundException or IOException)
{
    Console.Error.WriteLine($"error: {e.Message}");
    return 2;
}

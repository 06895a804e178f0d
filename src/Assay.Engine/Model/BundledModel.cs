namespace Assay.Model;

/// <summary>
/// The demo model Assay ships: a 4-layer GPT-2-architecture model (11.5 M parameters, float16) trained by the
/// project. The <c>assay</c> command carries it beside its executable; a library user gets it by referencing the
/// package <see cref="PackageId"/>, which copies it into the build output.
/// </summary>
public static class BundledModel
{
    /// <summary>The NuGet package that carries the demo model for library users.</summary>
    public const string PackageId = "Assay.DemoModel";

    /// <summary>Where the demo model is when it has been copied beside the application: <c>models/assay-demo</c> under <see cref="AppContext.BaseDirectory"/>.</summary>
    public static string ExpectedFolder => Path.Combine(AppContext.BaseDirectory, "models", "assay-demo");

    /// <summary>The demo model's folder, for <see cref="LanguageModel.Open(string)"/>.</summary>
    /// <exception cref="DirectoryNotFoundException">It is not beside the application (the message says which package to reference).</exception>
    public static string Locate()
    {
        string folder = ExpectedFolder;
        if (!File.Exists(Path.Combine(folder, Config.ModelConfig.FileName)))
        {
            throw new DirectoryNotFoundException(
                $"{folder}: the bundled demo model is not here; reference the package {PackageId} (it copies the model into the build output), or open a checkpoint folder of your own");
        }
        return folder;
    }
}

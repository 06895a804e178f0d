using System.Text.Json.Nodes;
using Assay.Output;

namespace Assay.Evaluation;

/// <summary>
/// A fitted probe with what it was fitted on: the feature (file stem), its width, and the training run's value
/// settings (model files and hashes, prompt, features, storage, engine; <see cref="RunRecord.ValueSettings"/>), so
/// it is never applied to another feature or another model's features by mistake.
/// </summary>
public sealed class SavedProbe
{
    private SavedProbe(LinearProbe probe, string feature, int width, JsonObject runSettings)
    {
        Probe = probe;
        Feature = feature;
        Width = width;
        RunSettings = runSettings;
    }

    /// <summary>The probe.</summary>
    public LinearProbe Probe { get; }

    /// <summary>The feature file stem it was fitted on.</summary>
    public string Feature { get; }

    /// <summary>Features a row.</summary>
    public int Width { get; }

    /// <summary>The training run's value settings.</summary>
    internal JsonObject RunSettings { get; }

    /// <summary>A probe fitted on <paramref name="feature"/> (a stem) of the run <paramref name="train"/> recorded.</summary>
    public static SavedProbe Create(LinearProbe probe, string feature, int width, RunRecord train)
    {
        ArgumentNullException.ThrowIfNull(probe);
        ArgumentNullException.ThrowIfNull(train);
        return new SavedProbe(probe, feature, width, train.ValueSettings());
    }

    /// <summary>Writes the probe file (atomically).</summary>
    public void Save(string path)
    {
        JsonObject o = Probe.ToJson();
        o["feature"] = Feature;
        o["width"] = Width;
        o["run_settings"] = RunSettings.DeepClone();
        AtomicFile.WriteJson(path, o);
    }

    /// <summary>Reads a probe file that <see cref="Save"/> wrote.</summary>
    /// <exception cref="ArgumentException">Not such a file, or one written before probes recorded their feature and run.</exception>
    public static SavedProbe Load(string path)
    {
        JsonObject o = LinearProbe.Parse(path);
        LinearProbe probe = LinearProbe.FromJson(path, o);
        if (o["feature"] is not JsonValue feature || o["width"] is not JsonValue width || o["run_settings"] is not JsonObject settings)
        {
            throw new ArgumentException($"{path}: the probe does not record the feature and run it was fitted on (written by an earlier assay); fit it again");
        }
        return new SavedProbe(probe, feature.GetValue<string>(), width.GetValue<int>(), (JsonObject)settings.DeepClone());
    }

    /// <summary>Why the probe must not score feature <paramref name="stem"/> (width <paramref name="width"/>) of the run <paramref name="test"/>, or null.</summary>
    public string? Mismatch(string stem, int width, RunRecord test)
    {
        ArgumentNullException.ThrowIfNull(test);
        if (stem != Feature)
        {
            return $"the probe was fitted on {Feature}, not {stem}";
        }
        if (width != Width)
        {
            return $"the probe was fitted on {Width} features a row; this run's {stem} has {width}";
        }
        return test.FirstValueDifference(RunSettings) is string difference
            ? $"the probe's training run and this run differ in {difference}"
            : null;
    }
}

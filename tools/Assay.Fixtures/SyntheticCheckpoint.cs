using System.Globalization;
using System.Text.Json;

namespace Assay.Fixtures;

/// <summary>A parameter as stored: its values already rounded through the checkpoint's dtype.</summary>
public sealed record StoredParameter(string Name, long[] Shape, float[] Values);

/// <summary>
/// Writes a checkpoint folder in the layout of published GPT-2 checkpoints (config.json, safetensors weights,
/// tokenizer files) with deterministic random weights. Scales are chosen so attention is far from uniform and every
/// sublayer matters: projections N(0, 1/fan_in), LayerNorm gains 1 + N(0, 0.1²), biases and embeddings N(0, 0.1²).
/// </summary>
public static class SyntheticCheckpoint
{
    /// <summary>The parameters in checkpoint order, with names as stored (prefix included) and stored values.</summary>
    public static IEnumerable<StoredParameter> Parameters(CheckpointSpec spec)
    {
        string p = spec.Prefix ? "transformer." : "";
        int d = spec.Width, m = spec.InnerWidth;
        yield return Make(spec, p + "wte.weight", [spec.Vocabulary, d], 0.1);
        yield return Make(spec, p + "wpe.weight", [spec.Context, d], 0.1);
        for (int i = 0; i < spec.Layers; i++)
        {
            string b = p + "h." + i.ToString(CultureInfo.InvariantCulture) + ".";
            yield return Make(spec, b + "ln_1.weight", [d], 0.1, 1.0);
            yield return Make(spec, b + "ln_1.bias", [d], 0.1);
            yield return Make(spec, b + "attn.c_attn.weight", [d, 3 * d], 1.0 / Math.Sqrt(d));
            yield return Make(spec, b + "attn.c_attn.bias", [3 * d], 0.1);
            yield return Make(spec, b + "attn.c_proj.weight", [d, d], 1.0 / Math.Sqrt(d));
            yield return Make(spec, b + "attn.c_proj.bias", [d], 0.1);
            yield return Make(spec, b + "ln_2.weight", [d], 0.1, 1.0);
            yield return Make(spec, b + "ln_2.bias", [d], 0.1);
            yield return Make(spec, b + "mlp.c_fc.weight", [d, m], 1.0 / Math.Sqrt(d));
            yield return Make(spec, b + "mlp.c_fc.bias", [m], 0.1);
            yield return Make(spec, b + "mlp.c_proj.weight", [m, d], 1.0 / Math.Sqrt(m));
            yield return Make(spec, b + "mlp.c_proj.bias", [d], 0.1);
        }
        yield return Make(spec, p + "ln_f.weight", [d], 0.1, 1.0);
        yield return Make(spec, p + "ln_f.bias", [d], 0.1);
        if (!spec.Tied)
        {
            yield return Make(spec, "lm_head.weight", [spec.Vocabulary, d], 0.1);
        }
    }

    /// <summary>Writes the folder with the spec's deterministic random weights (created if needed); returns its path.</summary>
    public static string Write(CheckpointSpec spec, string folder) => Write(spec, Parameters(spec), folder);

    /// <summary>
    /// Writes a checkpoint folder in the published GPT-2 layout — config.json, model.safetensors (or shards), tokenizer
    /// files — holding the given parameters (in <see cref="Parameters"/>' names and shapes, stored in the spec's dtype).
    /// </summary>
    public static string Write(CheckpointSpec spec, IEnumerable<StoredParameter> parameters, string folder)
    {
        Directory.CreateDirectory(folder);
        WriteConfig(spec, Path.Combine(folder, "config.json"));
        WriteWeights(spec, parameters, folder);
        switch (spec.Tokenizer)
        {
            case TokenizerFiles.SmallByteLevel:
                SmallVocabulary.WriteVocabAndMerges(folder);
                break;
            case TokenizerFiles.SmallByteLevelDefinition:
                SmallVocabulary.WriteDefinition(folder);
                break;
            case TokenizerFiles.Gpt2:
                Gpt2TokenizerFiles.Write(folder);
                break;
        }
        return folder;
    }

    public static void WriteConfig(CheckpointSpec spec, string path)
    {
        using var stream = File.Create(path);
        using var json = new Utf8JsonWriter(stream, new JsonWriterOptions { Indented = true });
        json.WriteStartObject();
        json.WriteString("model_type", "gpt2");
        json.WriteNumber("n_embd", spec.Width);
        json.WriteNumber("n_layer", spec.Layers);
        json.WriteNumber("n_head", spec.Heads);
        json.WriteNumber("n_positions", spec.Context);
        json.WriteNumber("vocab_size", spec.Vocabulary);
        if (spec.Inner is int inner)
        {
            json.WriteNumber("n_inner", inner);
        }
        json.WriteNumber("layer_norm_epsilon", 1e-5);
        json.WriteString("activation_function", spec.Activation);
        json.WriteBoolean("tie_word_embeddings", spec.Tied);
        json.WriteEndObject();
    }

    private static void WriteWeights(CheckpointSpec spec, IEnumerable<StoredParameter> parameters, string folder)
    {
        var tensors = new List<RawTensor>();
        string p = spec.Prefix ? "transformer." : "";
        int blockSeen = -1;
        foreach (StoredParameter sp in parameters)
        {
            tensors.Add(new RawTensor(sp.Name, spec.DType, sp.Shape, SafetensorsWriter.Encode(sp.Values, spec.DType)));
            // After each block's last parameter come its mask buffers, as in published files.
            if (spec.MaskBuffers && sp.Name.EndsWith("mlp.c_proj.bias", StringComparison.Ordinal))
            {
                blockSeen++;
                string b = p + "h." + blockSeen.ToString(CultureInfo.InvariantCulture) + ".";
                tensors.Add(new RawTensor(b + "attn.bias", "U8", [1, 1, spec.Context, spec.Context], CausalMask(spec.Context)));
                tensors.Add(new RawTensor(b + "attn.masked_bias", "F32", [], SafetensorsWriter.Encode([-1e4f], "F32")));
            }
        }

        if (spec.Shards <= 1)
        {
            SafetensorsWriter.Write(Path.Combine(folder, "model.safetensors"), tensors,
                new Dictionary<string, string> { ["format"] = "pt" });
            return;
        }

        var weightMap = new SortedDictionary<string, string>(StringComparer.Ordinal);
        int per = (tensors.Count + spec.Shards - 1) / spec.Shards;
        long total = 0;
        for (int s = 0; s < spec.Shards; s++)
        {
            string name = string.Create(CultureInfo.InvariantCulture, $"model-{s + 1:D5}-of-{spec.Shards:D5}.safetensors");
            List<RawTensor> part = tensors.Skip(s * per).Take(per).ToList();
            SafetensorsWriter.Write(Path.Combine(folder, name), part, new Dictionary<string, string> { ["format"] = "pt" });
            foreach (RawTensor t in part)
            {
                weightMap[t.Name] = name;
                total += t.Data.Length;
            }
        }
        using var stream = File.Create(Path.Combine(folder, "model.safetensors.index.json"));
        using var json = new Utf8JsonWriter(stream, new JsonWriterOptions { Indented = true });
        json.WriteStartObject();
        json.WriteStartObject("metadata");
        json.WriteNumber("total_size", total);
        json.WriteEndObject();
        json.WriteStartObject("weight_map");
        foreach ((string k, string v) in weightMap)
        {
            json.WriteString(k, v);
        }
        json.WriteEndObject();
        json.WriteEndObject();
    }

    private static StoredParameter Make(CheckpointSpec spec, string name, long[] shape, double std, double mean = 0)
    {
        long n = 1;
        foreach (long dim in shape)
        {
            n *= dim;
        }
        float[] values = new float[n];
        // Seeded by the unprefixed name, so both naming layouts hold the same values.
        string seedName = name.StartsWith("transformer.", StringComparison.Ordinal) ? name["transformer.".Length..] : name;
        var rng = new DeterministicRandom(DeterministicRandom.SeedFor(spec.Seed, seedName));
        rng.FillNormal(values, std, mean);
        RoundThrough(values, spec.DType);
        return new StoredParameter(name, shape, values);
    }

    /// <summary>Rounds values to what the dtype stores, so callers see exactly what a reader gets back.</summary>
    private static void RoundThrough(Span<float> values, string dtype)
    {
        for (int i = 0; i < values.Length; i++)
        {
            values[i] = dtype switch
            {
                "F16" => (float)(Half)values[i],
                "BF16" => BitConverter.UInt32BitsToSingle((uint)SafetensorsWriter.ToBFloat16(values[i]) << 16),
                _ => values[i],
            };
        }
    }

    private static byte[] CausalMask(int n)
    {
        byte[] mask = new byte[n * n];
        for (int i = 0; i < n; i++)
        {
            mask.AsSpan(i * n, i + 1).Fill(1);
        }
        return mask;
    }
}

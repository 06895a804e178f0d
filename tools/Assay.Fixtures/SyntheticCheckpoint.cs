using System.Globalization;
using System.Text.Json;

namespace Assay.Fixtures;

/// <summary>A parameter as stored: its values already rounded through the checkpoint's dtype.</summary>
public sealed record StoredParameter(string Name, long[] Shape, float[] Values);

/// <summary>
/// Writes a checkpoint folder in the layout of published checkpoints of its family (config.json, safetensors weights,
/// tokenizer files) with deterministic random weights. Scales are chosen so attention is far from uniform and every
/// sublayer matters: projections N(0, 1/fan_in), LayerNorm gains 1 + N(0, 0.1²), biases and embeddings N(0, 0.1²).
/// </summary>
public static class SyntheticCheckpoint
{
    /// <summary>The parameters in checkpoint order, with names as stored (prefix included) and stored values.</summary>
    public static IEnumerable<StoredParameter> Parameters(CheckpointSpec spec) =>
        spec.Family switch
        {
            "gpt2" => Gpt2Parameters(spec),
            "gpt_neox" => NeoXParameters(spec),
            _ when spec.LlamaStyle => LlamaParameters(spec),
            _ => throw new ArgumentException($"unknown family '{spec.Family}'", nameof(spec)),
        };

    /// <summary>
    /// The Llama-style layout (llama, mistral, qwen2): [out, in] linear layers, RMSNorm gains 1 + N(0, 0.1²), q/k/v
    /// biases N(0, 0.1²) for qwen2.
    /// </summary>
    private static IEnumerable<StoredParameter> LlamaParameters(CheckpointSpec spec)
    {
        int d = spec.Width, m = spec.InnerWidth, q = spec.Heads * spec.HeadWidth, kv = spec.KvHeads * spec.HeadWidth;
        bool bias = spec.Family == "qwen2";
        yield return Make(spec, "model.embed_tokens.weight", [spec.Vocabulary, d], 0.1);
        for (int i = 0; i < spec.Layers; i++)
        {
            string b = "model.layers." + i.ToString(CultureInfo.InvariantCulture) + ".";
            yield return Make(spec, b + "input_layernorm.weight", [d], 0.1, 1.0);
            yield return Make(spec, b + "self_attn.q_proj.weight", [q, d], 1.0 / Math.Sqrt(d));
            if (bias)
            {
                yield return Make(spec, b + "self_attn.q_proj.bias", [q], 0.1);
            }
            yield return Make(spec, b + "self_attn.k_proj.weight", [kv, d], 1.0 / Math.Sqrt(d));
            if (bias)
            {
                yield return Make(spec, b + "self_attn.k_proj.bias", [kv], 0.1);
            }
            yield return Make(spec, b + "self_attn.v_proj.weight", [kv, d], 1.0 / Math.Sqrt(d));
            if (bias)
            {
                yield return Make(spec, b + "self_attn.v_proj.bias", [kv], 0.1);
            }
            yield return Make(spec, b + "self_attn.o_proj.weight", [d, q], 1.0 / Math.Sqrt(q));
            yield return Make(spec, b + "post_attention_layernorm.weight", [d], 0.1, 1.0);
            yield return Make(spec, b + "mlp.gate_proj.weight", [m, d], 1.0 / Math.Sqrt(d));
            yield return Make(spec, b + "mlp.up_proj.weight", [m, d], 1.0 / Math.Sqrt(d));
            yield return Make(spec, b + "mlp.down_proj.weight", [d, m], 1.0 / Math.Sqrt(m));
        }
        yield return Make(spec, "model.norm.weight", [d], 0.1, 1.0);
        if (!spec.Tied)
        {
            yield return Make(spec, "lm_head.weight", [spec.Vocabulary, d], 0.1);
        }
    }

    /// <summary>The NeoX layout: fused per-head q/k/v [3d, d], biases everywhere, LayerNorms, untied embed_out unless tied.</summary>
    private static IEnumerable<StoredParameter> NeoXParameters(CheckpointSpec spec)
    {
        int d = spec.Width, m = spec.InnerWidth;
        yield return Make(spec, "gpt_neox.embed_in.weight", [spec.Vocabulary, d], 0.1);
        for (int i = 0; i < spec.Layers; i++)
        {
            string b = "gpt_neox.layers." + i.ToString(CultureInfo.InvariantCulture) + ".";
            yield return Make(spec, b + "input_layernorm.weight", [d], 0.1, 1.0);
            yield return Make(spec, b + "input_layernorm.bias", [d], 0.1);
            yield return Make(spec, b + "post_attention_layernorm.weight", [d], 0.1, 1.0);
            yield return Make(spec, b + "post_attention_layernorm.bias", [d], 0.1);
            yield return Make(spec, b + "attention.query_key_value.weight", [3 * d, d], 1.0 / Math.Sqrt(d));
            yield return Make(spec, b + "attention.query_key_value.bias", [3 * d], 0.1);
            yield return Make(spec, b + "attention.dense.weight", [d, d], 1.0 / Math.Sqrt(d));
            yield return Make(spec, b + "attention.dense.bias", [d], 0.1);
            yield return Make(spec, b + "mlp.dense_h_to_4h.weight", [m, d], 1.0 / Math.Sqrt(d));
            yield return Make(spec, b + "mlp.dense_h_to_4h.bias", [m], 0.1);
            yield return Make(spec, b + "mlp.dense_4h_to_h.weight", [d, m], 1.0 / Math.Sqrt(m));
            yield return Make(spec, b + "mlp.dense_4h_to_h.bias", [d], 0.1);
        }
        yield return Make(spec, "gpt_neox.final_layer_norm.weight", [d], 0.1, 1.0);
        yield return Make(spec, "gpt_neox.final_layer_norm.bias", [d], 0.1);
        if (!spec.Tied)
        {
            yield return Make(spec, "embed_out.weight", [spec.Vocabulary, d], 0.1);
        }
    }

    private static IEnumerable<StoredParameter> Gpt2Parameters(CheckpointSpec spec)
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

    /// <summary>The parameters encoded in the spec's dtype, each block's buffers after its last parameter, as published files order them.</summary>
    private static IEnumerable<RawTensor> Tensors(CheckpointSpec spec, IEnumerable<StoredParameter> parameters)
    {
        string p = spec.Prefix ? "transformer." : "";
        int blockSeen = -1;
        foreach (StoredParameter sp in parameters)
        {
            yield return new RawTensor(sp.Name, spec.DType, sp.Shape, SafetensorsWriter.Encode(sp.Values, spec.DType));
            if (spec.MaskBuffers && sp.Name.EndsWith(LastOfBlock(spec), StringComparison.Ordinal))
            {
                blockSeen++;
                foreach (RawTensor buffer in Buffers(spec, blockSeen, p))
                {
                    yield return buffer;
                }
            }
        }
    }

    public static void WriteConfig(CheckpointSpec spec, string path)
    {
        using var stream = File.Create(path);
        using var json = new Utf8JsonWriter(stream, new JsonWriterOptions { Indented = true });
        json.WriteStartObject();
        json.WriteString("model_type", spec.Family);
        if (spec.Family == "gpt2")
        {
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
        }
        else
        {
            json.WriteNumber("hidden_size", spec.Width);
            json.WriteNumber("num_hidden_layers", spec.Layers);
            json.WriteNumber("num_attention_heads", spec.Heads);
            json.WriteNumber("intermediate_size", spec.InnerWidth);
            json.WriteNumber("max_position_embeddings", spec.Context);
            json.WriteNumber("vocab_size", spec.Vocabulary);
            if (spec.LlamaStyle)
            {
                if (spec.KeyValueHeads is int kv)
                {
                    json.WriteNumber("num_key_value_heads", kv);
                }
                if (spec.HeadDim is int hd)
                {
                    json.WriteNumber("head_dim", hd);
                }
                json.WriteNumber("rms_norm_eps", 1e-6);
                json.WriteString("hidden_act", "silu");
                json.WriteNumber("rope_theta", spec.RopeTheta);
                json.WritePropertyName("rope_scaling");
                if (spec.RopeScaling is string scaling)
                {
                    json.WriteRawValue(scaling);
                }
                else
                {
                    json.WriteNullValue();
                }
                if (spec.Family == "qwen2" && spec.MaxWindowLayers is int fromLayer)
                {
                    json.WriteBoolean("use_sliding_window", true);
                    json.WriteNumber("max_window_layers", fromLayer);
                }
                if (spec.SlidingWindow is int window)
                {
                    json.WriteNumber("sliding_window", window);
                }
            }
            else
            {
                json.WriteNumber("layer_norm_eps", 1e-5);
                json.WriteString("hidden_act", spec.Activation);
                json.WriteNumber("rotary_pct", spec.RotaryPct);
                json.WriteNumber("rotary_emb_base", spec.RopeTheta);
                json.WriteBoolean("use_parallel_residual", spec.ParallelResidual);
            }
        }
        json.WriteBoolean("tie_word_embeddings", spec.Tied);
        json.WriteEndObject();
    }

    private static void WriteWeights(CheckpointSpec spec, IEnumerable<StoredParameter> parameters, string folder)
    {
        if (spec.Shards <= 1)
        {
            // One tensor in memory at a time, so shapes larger than memory can be written.
            SafetensorsWriter.WriteStreamed(Path.Combine(folder, "model.safetensors"), Tensors(spec, parameters),
                new Dictionary<string, string> { ["format"] = "pt" });
            return;
        }

        var tensors = Tensors(spec, parameters).ToList();
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

    private static string LastOfBlock(CheckpointSpec spec) => spec.Family switch
    {
        "gpt2" => "mlp.c_proj.bias",
        "gpt_neox" => "mlp.dense_4h_to_h.bias",
        _ => "mlp.down_proj.weight",
    };

    /// <summary>Block i's non-parameter buffers: causal masks (GPT-2, NeoX) and the rotary inverse frequencies (rotary families).</summary>
    private static IEnumerable<RawTensor> Buffers(CheckpointSpec spec, int block, string prefix)
    {
        string i = block.ToString(CultureInfo.InvariantCulture);
        if (spec.Family == "gpt2")
        {
            yield return new RawTensor(prefix + "h." + i + ".attn.bias", "U8", [1, 1, spec.Context, spec.Context], CausalMask(spec.Context));
            yield return new RawTensor(prefix + "h." + i + ".attn.masked_bias", "F32", [], SafetensorsWriter.Encode([-1e4f], "F32"));
            yield break;
        }
        int rotary = spec.Family == "gpt_neox" ? (int)Math.Round(spec.HeadWidth * spec.RotaryPct) : spec.HeadWidth;
        float[] inverse = new float[rotary / 2];
        for (int j = 0; j < inverse.Length; j++)
        {
            inverse[j] = (float)(1.0 / Math.Pow(spec.RopeTheta, 2.0 * j / rotary));
        }
        if (spec.Family == "gpt_neox")
        {
            string b = "gpt_neox.layers." + i + ".attention.";
            yield return new RawTensor(b + "bias", "U8", [1, 1, spec.Context, spec.Context], CausalMask(spec.Context));
            yield return new RawTensor(b + "masked_bias", "F32", [], SafetensorsWriter.Encode([-1e9f], "F32"));
            yield return new RawTensor(b + "rotary_emb.inv_freq", "F32", [inverse.Length], SafetensorsWriter.Encode(inverse, "F32"));
        }
        else
        {
            yield return new RawTensor("model.layers." + i + ".self_attn.rotary_emb.inv_freq", "F32", [inverse.Length], SafetensorsWriter.Encode(inverse, "F32"));
        }
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

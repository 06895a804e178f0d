using System.Buffers.Binary;
using System.Text;
using Assay.Config;
using Assay.Input;
using Assay.Tests.Support;
using Assay.Weights;
using FsCheck;
using FsCheck.Fluent;

namespace Assay.Tests.Hardening;

/// <summary>
/// Property-based tests (FsCheck 3) of the loaders against structured mutations of their inputs. The only outcome
/// allowed for bad input is the loader's own exception; a file that opens must be readable within its bounds.
/// Each case is one FsCheck-generated (seed, mutation) pair that builds a file deterministically.
/// </summary>
public sealed class LoaderPropertyTests : IDisposable
{
    /// <summary>Cases per property: 400 in the default run; <c>ASSAY_PROPERTY_CASES</c> sets more for a long run.</summary>
    private static readonly int Cases = CasesOr(400);

    /// <summary>Cases per property: <c>ASSAY_PROPERTY_CASES</c> when set, else <paramref name="byDefault"/>.</summary>
    internal static int CasesOr(int byDefault) =>
        int.TryParse(Environment.GetEnvironmentVariable("ASSAY_PROPERTY_CASES"), out int n) && n > 0 ? n : byDefault;

    private readonly TempFolder _temp = new();

    private static readonly string[] DTypes = ["F32", "F16", "BF16", "I64", "U8", "BOOL", "F64", "I32"];

    public void Dispose() => _temp.Dispose();

    /// <summary>The safetensors mutations: what each one does to an otherwise valid file.</summary>
    private enum Mutation
    {
        None, HugeShape, OffsetPastEnd, BeginAfterEnd, Overlap, DuplicateName, HeaderLengthTooLarge, HeaderLengthOverCap,
        DeepNesting, InvalidUtf8Name, TruncatedData, FlippedHeaderByte, RankOverCap, UnknownDType, NonNumberDimension,
        NegativeOffset, MetadataNotStrings, EmptyFile,
    }

    [Fact]
    public void Safetensors_files_open_correctly_or_fail_with_WeightsFormatException()
    {
        int n = 0;
        Gen<(int Seed, Mutation Mutation)> cases =
            from seed in Gen.Choose(0, int.MaxValue)
            from m in Gen.Elements(Enum.GetValues<Mutation>())
            select (seed, m);
        Prop.ForAll(cases.ToArbitrary(), c =>
        {
            string path = _temp.File($"f{n++}.safetensors");
            File.WriteAllBytes(path, BuildSafetensors(c.Seed, c.Mutation));
            try
            {
                using SafetensorsFile f = SafetensorsFile.Open(path);
                Assert.True(c.Mutation is Mutation.None or Mutation.FlippedHeaderByte or Mutation.OffsetPastEnd or Mutation.TruncatedData,
                    $"{c.Mutation} (seed {c.Seed}) was accepted");
                foreach (TensorInfo t in f.Tensors)
                {
                    Assert.InRange(t.DataEnd, t.DataBegin, f.FileLength);
                    if (t.DType.IsParameterType())
                    {
                        f.ReadFloat32(t, new float[t.ElementCount]);
                    }
                }
            }
            catch (WeightsFormatException e)
            {
                Assert.NotEqual(Mutation.None, c.Mutation);
                Assert.StartsWith(path, e.Message, StringComparison.Ordinal);
            }
        }).Check(FsCheck.Config.QuickThrowOnFailure.WithMaxTest(Cases));
    }

    [Fact]
    public void Config_files_load_or_fail_with_ModelConfigException()
    {
        // A GPT-2 config and the published configs of every other family (rope_scaling objects, windows, rotary_pct).
        string[] valid =
        [
            """{"model_type": "gpt2", "n_embd": 48, "n_layer": 2, "n_head": 3, "n_positions": 40, "vocab_size": 300, "layer_norm_epsilon": 1e-5, "activation_function": "gelu_new"}""",
            .. Assay.Tests.Config.PublishedConfigs.All.Select(p => p.Json),
        ];
        int n = 0;
        Gen<(int Seed, int Kind, int Which)> cases = from seed in Gen.Choose(0, int.MaxValue) from kind in Gen.Choose(0, 5)
                                                     from which in Gen.Choose(0, valid.Length - 1) select (seed, kind, which);
        Prop.ForAll(cases.ToArbitrary(), c =>
        {
            string path = _temp.File($"config{n++}.json");
            File.WriteAllBytes(path, Mutate(Encoding.UTF8.GetBytes(valid[c.Which]), c.Seed, c.Kind));
            try
            {
                ModelConfig.Load(path);
            }
            catch (ModelConfigException e)
            {
                Assert.Contains(path, e.Message, StringComparison.Ordinal);
            }
        }).Check(FsCheck.Config.QuickThrowOnFailure.WithMaxTest(Cases));
    }

    [Fact]
    public void Text_inputs_yield_records_or_fail_with_TextInputException()
    {
        string[] samples =
        [
            "{\"id\": 1, \"text\": \"a lamp\", \"label\": \"x\"}\n{\"id\": 2, \"text\": \"rope\"}\n",
            "id,text,label\n1,\"a \"\"lamp\"\"\",x\n2,rope,y\n",
            "id\ttext\tlabel\n1\ta lamp\tx\n",
            "a lamp\nrope\n",
        ];
        string[] extensions = [".jsonl", ".csv", ".tsv", ".txt"];
        int n = 0;
        Gen<(int Seed, int Kind, int Format)> cases =
            from seed in Gen.Choose(0, int.MaxValue) from kind in Gen.Choose(0, 6) from format in Gen.Choose(0, 3)
            select (seed, kind, format);
        Prop.ForAll(cases.ToArbitrary(), c =>
        {
            string path = _temp.File($"input{n++}{extensions[c.Format]}");
            File.WriteAllBytes(path, Mutate(Encoding.UTF8.GetBytes(samples[c.Format]), c.Seed, c.Kind));
            try
            {
                using TextInputReader reader = TextInputReader.Open(path);
                foreach (InputRecord r in reader.Records())
                {
                    Assert.True(r.Accepted ? r.Text is { Length: > 0 } : r.Rejection is { Length: > 0 });
                }
            }
            catch (TextInputException e)
            {
                Assert.Contains(path, e.Message, StringComparison.Ordinal);
            }
        }).Check(FsCheck.Config.QuickThrowOnFailure.WithMaxTest(Cases));
    }

    /// <summary>
    /// Byte-level mutations of a valid file: 0 flip bytes, 1 insert invalid UTF-8, 2 truncate, 3 duplicate a slice,
    /// 4 nest the JSON deeply, 5 replace a digit run with a number past 64 bits, 6 insert JSON escapes (lone and paired
    /// surrogates, NUL, malformed escapes) or a key given twice.
    /// </summary>
    internal static byte[] Mutate(byte[] valid, int seed, int kind)
    {
        var rng = new Random(seed);
        var bytes = new List<byte>(valid);
        switch (kind)
        {
            case 0:
                for (int i = 0; i < 1 + rng.Next(4); i++)
                {
                    bytes[rng.Next(bytes.Count)] = (byte)rng.Next(256);
                }
                break;
            case 1:
                bytes.InsertRange(rng.Next(bytes.Count), new byte[] { 0xC3, 0x28, 0xFF, 0xED, 0xA0, 0x80 }[..(1 + rng.Next(6))]);
                break;
            case 2:
            {
                int at = rng.Next(bytes.Count);
                bytes.RemoveRange(at, bytes.Count - at);
                break;
            }
            case 3:
            {
                int at = rng.Next(bytes.Count), length = rng.Next(bytes.Count - at);
                bytes.InsertRange(rng.Next(bytes.Count), bytes.GetRange(at, length));
                break;
            }
            case 6:
            {
                string[] escapes = ["\\ud800", "\\udc00", "\\ud83d\\ude42", "\\ude42\\ud83d", "\\u0000", "\\x", "\\u12", "\\", "\", \"text\": \"dup"];
                for (int i = 0; i < 1 + rng.Next(3); i++)
                {
                    bytes.InsertRange(rng.Next(bytes.Count), Encoding.UTF8.GetBytes(escapes[rng.Next(escapes.Length)]));
                }
                break;
            }
            case 4:
            {
                int depth = 10 + rng.Next(5000);
                return Encoding.UTF8.GetBytes(new string('[', depth) + new string(']', depth));
            }
            default:
            {
                string text = Encoding.UTF8.GetString(valid);
                int digit = text.IndexOfAny("0123456789".ToCharArray(), rng.Next(text.Length));
                return digit < 0 ? valid : Encoding.UTF8.GetBytes(text[..digit] + "99999999999999999999999" + text[digit..]);
            }
        }
        return [.. bytes];
    }

    /// <summary>1–4 tensors (2–4 for a duplicate name) laid end to end with one <see cref="Mutation"/> applied to the header or the data.</summary>
    private static byte[] BuildSafetensors(int seed, Mutation mutation)
    {
        var rng = new Random(seed);
        int count = (mutation == Mutation.DuplicateName ? 2 : 1) + rng.Next(3);
        var entries = new List<string>();
        long offset = 0;
        for (int i = 0; i < count; i++)
        {
            string dtype = DTypes[rng.Next(DTypes.Length)];
            int size = dtype switch { "F32" or "I32" => 4, "F16" or "BF16" => 2, "I64" or "F64" => 8, _ => 1 };
            long[] shape = [.. Enumerable.Range(0, rng.Next(4)).Select(_ => (long)rng.Next(5))];
            if (mutation == Mutation.Overlap && i == count - 1)
            {
                shape = [2];   // a tensor with bytes, so moving it by one byte overlaps its neighbour or leaves a gap
            }
            long bytes = shape.Aggregate(1L, (a, b) => a * b) * size;
            string shapeText = string.Join(", ", shape);
            long begin = offset, end = offset + bytes;
            string name = $"t{i}";
            switch (mutation)
            {
                case Mutation.HugeShape when i == 0:
                    shapeText = rng.Next(2) == 0 ? "4294967296, 4294967296" : "9223372036854775807, 2";
                    break;
                case Mutation.BeginAfterEnd when i == 0:
                    (begin, end) = (end + 1, begin);
                    break;
                case Mutation.Overlap when i == count - 1 && i > 0:
                    begin -= 1;
                    end -= 1;
                    break;
                case Mutation.Overlap when count == 1:
                    begin += 2;
                    end += 2;
                    break;
                case Mutation.DuplicateName when i == count - 1:
                    name = "t0";
                    break;
                case Mutation.InvalidUtf8Name when i == 0:
                    name = "\uFFFFbad";
                    break;
                case Mutation.RankOverCap when i == 0:
                    shapeText = string.Join(", ", Enumerable.Repeat("1", 9 + rng.Next(100)));
                    break;
                case Mutation.UnknownDType when i == 0:
                    dtype = rng.Next(2) == 0 ? "F128" : "";
                    break;
                case Mutation.NonNumberDimension when i == 0:
                    shapeText = rng.Next(2) == 0 ? "\"4\"" : "1.5";
                    break;
                case Mutation.NegativeOffset when i == 0:
                    begin = -8;
                    break;
                default:
                    break;
            }
            entries.Add($"\"{name}\": {{\"dtype\": \"{dtype}\", \"shape\": [{shapeText}], \"data_offsets\": [{begin}, {end}]}}");
            offset += bytes;
        }
        long dataLength = offset;
        if (mutation == Mutation.OffsetPastEnd)
        {
            dataLength = Math.Max(0, offset - 1 - rng.Next(4));
        }
        string metadata = mutation switch
        {
            Mutation.DeepNesting => "\"__metadata__\": " + new string('[', 200) + new string(']', 200) + ", ",
            Mutation.MetadataNotStrings => "\"__metadata__\": {\"k\": 1}, ",
            _ => "",
        };
        byte[] header = Encoding.UTF8.GetBytes("{" + metadata + string.Join(", ", entries) + "}");
        if (mutation == Mutation.InvalidUtf8Name)
        {
            int at = Array.IndexOf(header, (byte)0xEF);
            header[at] = 0xFF;   // U+FFFF's lead byte becomes a byte that never starts a UTF-8 sequence
        }
        if (mutation == Mutation.FlippedHeaderByte)
        {
            header[rng.Next(header.Length)] ^= (byte)(1 + rng.Next(255));
        }
        if (mutation == Mutation.EmptyFile)
        {
            return new byte[rng.Next(8)];
        }

        byte[] file = new byte[8 + header.Length + dataLength];
        ulong lengthField = mutation switch
        {
            Mutation.HeaderLengthTooLarge => (ulong)(header.Length + dataLength + 1 + rng.Next(1000)),
            Mutation.HeaderLengthOverCap => ulong.MaxValue - (ulong)rng.Next(1000),
            _ => (ulong)header.Length,
        };
        BinaryPrimitives.WriteUInt64LittleEndian(file, lengthField);
        header.CopyTo(file, 8);
        new Random(seed + 1).NextBytes(file.AsSpan(8 + header.Length));
        if (mutation == Mutation.TruncatedData && file.Length > 8 + header.Length)
        {
            return file[..^1];
        }
        return file;
    }
}

using System.Buffers.Binary;
using Assay.Fixtures;
using Assay.Tests.Support;
using Assay.Weights;

namespace Assay.Tests.Weights;

/// <summary>The reader against the open safetensors layout: good files round-trip; each kind of bad file raises
/// <see cref="WeightsFormatException"/> naming the file, the tensor where there is one, and what was wrong.</summary>
public sealed class SafetensorsFileTests : IDisposable
{
    private readonly TempFolder _temp = new();

    public void Dispose() => _temp.Dispose();

    [Theory]
    [InlineData("F32")]
    [InlineData("F16")]
    [InlineData("BF16")]
    public void Reads_each_float_dtype_back_to_float32(string dtype)
    {
        float[] values = [0f, 1f, -2.5f, 3.140625f, 65504f, -1e-3f, 0.1f];
        string path = _temp.File("t.safetensors");
        SafetensorsWriter.Write(path, [new RawTensor("w", dtype, [7], SafetensorsWriter.Encode(values, dtype))]);
        using SafetensorsFile f = SafetensorsFile.Open(path);
        Assert.True(f.TryGetTensor("w", out TensorInfo? t));
        float[] read = new float[7];
        f.ReadFloat32(t, read);
        for (int i = 0; i < values.Length; i++)
        {
            // Expected values: the IEEE conversions of .NET's Half (F16) and truncation-free bf16 rounding (BF16).
            float expected = dtype switch
            {
                "F16" => (float)(Half)values[i],
                "BF16" => BitConverter.UInt32BitsToSingle((uint)SafetensorsWriter.ToBFloat16(values[i]) << 16),
                _ => values[i],
            };
            Assert.Equal(expected, read[i]);
        }
    }

    [Fact]
    public void Bf16_widening_is_the_upper_half_of_float32_bits()
    {
        // 0x3FC0 is bf16 for 1.5 (common practice: bf16 keeps float32's sign, exponent and top 7 mantissa bits).
        float[] dst = new float[2];
        SafetensorsFile.WidenBFloat16([0x3FC0, 0xC000], dst);
        Assert.Equal([1.5f, -2f], dst);
    }

    [Fact]
    public void Reads_metadata_and_sorts_tensors_by_offset()
    {
        string path = _temp.File("m.safetensors");
        SafetensorsWriter.Write(path,
            [new RawTensor("b", "F32", [2], new byte[8]), new RawTensor("a", "U8", [3], [1, 2, 3])],
            new Dictionary<string, string> { ["format"] = "pt" });
        using SafetensorsFile f = SafetensorsFile.Open(path);
        Assert.Equal("pt", f.Metadata["format"]);
        Assert.Equal(["b", "a"], f.Tensors.Select(t => t.Name));
        Assert.Equal(TensorDType.U8, f.Tensors[1].DType);
    }

    [Fact]
    public void Refuses_a_file_shorter_than_the_length_field() =>
        AssertBad(new byte[5], null, "8-byte header length");

    [Fact]
    public void Refuses_a_truncated_file()
    {
        byte[] good = GoodFile();
        AssertBad(good[..^4], "w", "run past the data area");
    }

    [Fact]
    public void Refuses_a_header_length_past_the_end()
    {
        byte[] file = GoodFile();
        BinaryPrimitives.WriteUInt64LittleEndian(file, (ulong)file.Length);
        AssertBad(file, null, "runs past the end of the file");
    }

    [Fact]
    public void Refuses_a_header_over_the_cap()
    {
        byte[] file = GoodFile();
        BinaryPrimitives.WriteUInt64LittleEndian(file, (ulong)SafetensorsFile.MaxHeaderBytes + 1);
        AssertBad(file, null, "over the cap");
    }

    [Fact]
    public void Refuses_more_tensors_than_the_cap_before_converting_any()
    {
        string entries = string.Join(", ", Enumerable.Range(0, SafetensorsFile.MaxTensors + 2).Select(i => $"\"t{i}\": {{\"dtype\": \"U8\", \"shape\": [0], \"data_offsets\": [0, 0]}}"));
        AssertBad(SafetensorsWriter.FileFromHeaderText("{" + entries + "}", []), null, $"more than {SafetensorsFile.MaxTensors} tensors");
    }

    [Fact]
    public void Refuses_malformed_json() =>
        AssertBad(SafetensorsWriter.FileFromHeaderText("{\"w\": {\"dtype\": \"F32\",", new byte[4]), null, "not well-formed JSON");

    [Fact]
    public void Refuses_invalid_utf8_in_the_header()
    {
        byte[] file = SafetensorsWriter.FileFromHeaderText("{\"w\u00e9\": 1}", []);
        file[11] = 0xFF; // break the two-byte sequence of é
        AssertBad(file, null, "not valid UTF-8");
    }

    [Fact]
    public void Refuses_an_unknown_dtype() =>
        AssertBad(Header("{\"w\":{\"dtype\":\"F24\",\"shape\":[1],\"data_offsets\":[0,4]}}", 4), "w", "unknown dtype 'F24'");

    [Fact]
    public void Refuses_a_span_that_does_not_match_the_shape() =>
        AssertBad(Header("{\"w\":{\"dtype\":\"F32\",\"shape\":[2,3],\"data_offsets\":[0,20]}}", 20), "w", "needs 24 bytes; data_offsets span 20");

    [Fact]
    public void Refuses_overlapping_spans() =>
        AssertBad(Header("{\"a\":{\"dtype\":\"F32\",\"shape\":[2],\"data_offsets\":[0,8]},\"b\":{\"dtype\":\"F32\",\"shape\":[2],\"data_offsets\":[4,12]}}", 12),
            "b", "overlap tensor 'a'");

    [Fact]
    public void Refuses_a_gap_between_spans() =>
        AssertBad(Header("{\"a\":{\"dtype\":\"F32\",\"shape\":[1],\"data_offsets\":[0,4]},\"b\":{\"dtype\":\"F32\",\"shape\":[1],\"data_offsets\":[8,12]}}", 12),
            "b", "gap of 4 unindexed bytes");

    [Fact]
    public void Refuses_trailing_bytes_no_tensor_covers() =>
        AssertBad(Header("{\"a\":{\"dtype\":\"F32\",\"shape\":[1],\"data_offsets\":[0,4]}}", 9), null, "the rest is not indexed");

    [Fact]
    public void Refuses_a_duplicate_name() =>
        AssertBad(Header("{\"a\":{\"dtype\":\"U8\",\"shape\":[1],\"data_offsets\":[0,1]},\"a\":{\"dtype\":\"U8\",\"shape\":[1],\"data_offsets\":[1,2]}}", 2),
            "a", "appears twice");

    [Fact]
    public void Refuses_a_shape_whose_element_count_overflows() =>
        AssertBad(Header("{\"a\":{\"dtype\":\"F32\",\"shape\":[4294967296,4294967296],\"data_offsets\":[0,4]}}", 4), "a", "more elements than 2^63");

    [Fact]
    public void Refuses_negative_offsets() =>
        AssertBad(Header("{\"a\":{\"dtype\":\"U8\",\"shape\":[1],\"data_offsets\":[-1,0]}}", 1), "a", "0 <= begin <= end");

    [Fact]
    public void Refuses_a_header_that_is_not_an_object() =>
        AssertBad(Header("[1,2,3]", 0), null, "must be a JSON object");

    private byte[] GoodFile()
    {
        string path = _temp.File("good.safetensors");
        SafetensorsWriter.Write(path, [new RawTensor("w", "F32", [4], SafetensorsWriter.Encode([1f, 2f, 3f, 4f], "F32"))]);
        return File.ReadAllBytes(path);
    }

    private static byte[] Header(string json, int dataBytes) => SafetensorsWriter.FileFromHeaderText(json, new byte[dataBytes]);

    private void AssertBad(byte[] file, string? tensor, string fragment)
    {
        string path = _temp.File("bad.safetensors");
        File.WriteAllBytes(path, file);
        var e = Assert.Throws<WeightsFormatException>(() => SafetensorsFile.Open(path).Dispose());
        Assert.Equal(path, e.FilePath);
        Assert.Equal(tensor, e.TensorName);
        Assert.Contains(fragment, e.Message, StringComparison.Ordinal);
        Assert.StartsWith(path, e.Message, StringComparison.Ordinal);
    }
}

using System.Globalization;
using System.Runtime.CompilerServices;
using Assay.Kernels;
using Assay.Weights;

namespace Assay.Model;

/// <summary>
/// Converts tensors one at a time. Matrices stored [out, in] (the token embedding, the head, the rotary families'
/// layers, stacked or not) are read one panel of 64 rows at a time into a small scratch buffer and packed from there;
/// GPT-2's [in, out] matrices go whole through a scratch buffer sized for the largest. Loading leaves no float32
/// copies behind; mapped file pages are released as they are converted (a panel's rows at a time for [out, in]
/// matrices, a whole tensor otherwise), and every value is checked finite.
/// A cancelled <paramref name="cancellationToken"/> stops the load before the next tensor.
/// </summary>
internal sealed class TensorReader(SafetensorsCheckpoint checkpoint, string prefix, CancellationToken cancellationToken)
{
    private float[] _scratch = [];
    private float[] _rows = [];

    /// <summary>A small tensor (norm gains, biases, position embeddings), as its own array.</summary>
    public float[] Read(string name) => Scratch(prefix + name).ToArray();

    /// <summary>A tensor converted into the scratch buffer: valid until the next call.</summary>
    public ReadOnlySpan<float> Scratch(string name)
    {
        long n = Info(name).ElementCount;
        if (_scratch.LongLength < n)
        {
            _scratch = new float[n];
        }
        Span<float> values = _scratch.AsSpan(0, checked((int)n));
        Convert(name, values);
        return values;
    }

    /// <summary>A matrix of the block stored [in, out] (GPT-2's layout), packed, with its bias.</summary>
    public PackedMatrix Matrix(string name, string biasName, int rows, int columns, WeightPrecision precision)
    {
        float[] bias = Read(biasName);
        return PackedMatrix.FromRowMajor(Scratch(prefix + name), rows, columns, bias, precision);
    }

    /// <summary>
    /// Linear layers stored [out, in] (y = x·Wᵀ + b), stacked along their outputs and packed as one K × N matrix
    /// (K = <paramref name="inputs"/>, N = the outputs summed): column blocks in the order named, biases alike.
    /// </summary>
    public PackedMatrix Linear(IReadOnlyList<string> weights, IReadOnlyList<string>? biases, int inputs, WeightPrecision precision)
    {
        TensorInfo[] parts = [.. weights.Select(w => Info(prefix + w))];
        float[] bias = biases is null ? [] : [.. biases.SelectMany(Read)];
        return Transposed(parts, inputs, bias, precision);
    }

    /// <summary>A tensor stored [out, in] (N × K, K = <paramref name="rows"/>) packed as its K × N transpose, without a bias.</summary>
    public PackedMatrix Transposed(string name, int rows, WeightPrecision precision) => Transposed([Info(name)], rows, [], precision);

    /// <summary>
    /// Tensors stored [out, in] with K = <paramref name="inputs"/> stacked along their outputs, packed as one K × N
    /// matrix from panels of 64 stacked rows read straight from the file (a panel may span two tensors).
    /// </summary>
    private PackedMatrix Transposed(TensorInfo[] parts, int inputs, float[] bias, WeightPrecision precision)
    {
        long total = parts.Sum(t => t.ElementCount);
        int columns = (int)(total / inputs);
        if (_rows.Length < PackedMatrix.PanelWidth * inputs)
        {
            _rows = new float[PackedMatrix.PanelWidth * inputs];
        }
        PackedMatrix packed = PackedMatrix.FromTransposedRows(inputs, columns, (first, count) =>
        {
            Span<float> into = _rows.AsSpan(0, count * inputs);
            int filled = 0;
            long start = 0;
            foreach (TensorInfo t in parts)
            {
                int tensorRows = (int)(t.ElementCount / inputs);
                int from = Math.Max(first + filled, (int)start) - (int)start, until = Math.Min(first + count, (int)start + tensorRows) - (int)start;
                if (until > from)
                {
                    ConvertRows(t, from, until - from, inputs, into.Slice(filled * inputs, (until - from) * inputs));
                    filled += until - from;
                }
                start += tensorRows;
            }
            return into;
        }, bias, precision);
        foreach (TensorInfo t in parts)
        {
            checkpoint.ReleasePages(t);   // the pages that straddled two panels' rows
        }
        return packed;
    }

    /// <summary>Rows <paramref name="first"/> … of a tensor of <paramref name="width"/> columns, converted and checked finite.</summary>
    private void ConvertRows(TensorInfo t, int first, int count, int width, Span<float> values)
    {
        cancellationToken.ThrowIfCancellationRequested();
        checkpoint.ReadFloat32(t, (long)first * width, values);
        int bad = FirstNonFinite(values);
        if (bad >= 0)
        {
            throw new WeightsFormatException(t.FilePath, t.Name,
                $"element {((long)first * width) + bad} is {values[bad].ToString(CultureInfo.InvariantCulture)}; parameters must be finite");
        }
        checkpoint.ReleasePages(t, (long)first * width, values.Length);
    }

    private TensorInfo Info(string name)
    {
        checkpoint.TryGetTensor(name, out TensorInfo? t);
        return t!;
    }

    private void Convert(string name, Span<float> values)
    {
        cancellationToken.ThrowIfCancellationRequested();
        TensorInfo t = Info(name);
        checkpoint.ReadFloat32(t, values);
        checkpoint.ReleasePages(t);
        int bad = FirstNonFinite(values);
        if (bad >= 0)
        {
            throw new WeightsFormatException(t.FilePath, name,
                $"element {bad} is {values[bad].ToString(CultureInfo.InvariantCulture)}; parameters must be finite");
        }
    }

    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private static int FirstNonFinite(ReadOnlySpan<float> values)
    {
        for (int i = 0; i < values.Length; i++)
        {
            if (!float.IsFinite(values[i]))
            {
                return i;
            }
        }
        return -1;
    }
}

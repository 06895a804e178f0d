using System.Globalization;
using System.Runtime.CompilerServices;
using Assay.Kernels;
using Assay.Weights;

namespace Assay.Model;

/// <summary>
/// Converts tensors one at a time. The matrices go through reused scratch buffers (sized for the largest tensor, or
/// the largest stack of tensors packed as one) straight into their packed form, so loading leaves no float32 copies
/// behind; each tensor's mapped file pages are released once it is converted, and every value is checked finite.
/// A cancelled <paramref name="cancellationToken"/> stops the load before the next tensor.
/// </summary>
internal sealed class TensorReader(SafetensorsCheckpoint checkpoint, string prefix, CancellationToken cancellationToken)
{
    private float[] _scratch = [];
    private float[] _stack = [];

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
        long total = 0;
        foreach (string w in weights)
        {
            total += Info(prefix + w).ElementCount;
        }
        if (_stack.LongLength < total)
        {
            _stack = new float[total];
        }
        Span<float> stack = _stack.AsSpan(0, checked((int)total));
        int offset = 0;
        foreach (string w in weights)
        {
            int n = (int)Info(prefix + w).ElementCount;
            Convert(prefix + w, stack.Slice(offset, n));
            offset += n;
        }
        float[] bias = biases is null ? [] : [.. biases.SelectMany(Read)];
        return PackedMatrix.FromTransposed(stack, inputs, (int)(total / inputs), bias, precision);
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

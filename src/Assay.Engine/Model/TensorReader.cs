using System.Globalization;
using Assay.Kernels;
using Assay.Weights;

namespace Assay.Model;

/// <summary>
/// Converts tensors one at a time. The matrices go through one reused scratch buffer (sized for the largest
/// tensor) straight into their packed form, so loading leaves no float32 copies behind; each tensor's mapped file
/// pages are released once it is converted.
/// </summary>
internal sealed class TensorReader(SafetensorsCheckpoint checkpoint, string prefix)
{
    private float[] _scratch = [];

    /// <summary>A small tensor (norm gains, biases, position embeddings), as its own array.</summary>
    public float[] Read(string name) => Scratch(prefix + name).ToArray();

    /// <summary>A tensor converted into the scratch buffer: valid until the next call.</summary>
    public ReadOnlySpan<float> Scratch(string name)
    {
        checkpoint.TryGetTensor(name, out TensorInfo? t);
        if (_scratch.LongLength < t!.ElementCount)
        {
            _scratch = new float[t.ElementCount];
        }
        Span<float> values = _scratch.AsSpan(0, checked((int)t.ElementCount));
        checkpoint.ReadFloat32(t, values);
        checkpoint.ReleasePages(t);
        int bad = FirstNonFinite(values);
        if (bad >= 0)
        {
            throw new WeightsFormatException(t.FilePath, name,
                $"element {bad} is {values[bad].ToString(CultureInfo.InvariantCulture)}; parameters must be finite");
        }
        return values;
    }

    /// <summary>A matrix of the block, packed, with its bias.</summary>
    public PackedMatrix Matrix(string name, string biasName, int rows, int columns, WeightPrecision precision)
    {
        float[] bias = Read(biasName);
        return PackedMatrix.FromRowMajor(Scratch(prefix + name), rows, columns, bias, precision);
    }

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

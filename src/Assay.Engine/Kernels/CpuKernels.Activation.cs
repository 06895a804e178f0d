using System.Numerics.Tensors;
using Assay.Config;

namespace Assay.Kernels;

internal static partial class CpuKernels
{
    private const int ActivationChunk = 1024;

    /// <summary>Applies the MLP activation in place.</summary>
    public static void Activate(Span<float> x, Activation activation)
    {
        switch (activation)
        {
            case Activation.GeluTanh:
                GeluTanh(x);
                break;
            case Activation.GeluErf:
                GeluErf(x);
                break;
            case Activation.Silu:
                Silu(x);
                break;
            default:
                TensorPrimitives.Max(x, 0f, x);
                break;
        }
    }

    /// <summary>SiLU in place: x·σ(x), σ from TensorPrimitives.Sigmoid.</summary>
    public static void Silu(Span<float> x)
    {
        Span<float> t = stackalloc float[ActivationChunk];
        for (int i = 0; i < x.Length; i += ActivationChunk)
        {
            Span<float> xs = x.Slice(i, Math.Min(ActivationChunk, x.Length - i));
            Span<float> ts = t[..xs.Length];
            TensorPrimitives.Sigmoid(xs, ts);
            TensorPrimitives.Multiply(xs, ts, xs);
        }
    }

    /// <summary>
    /// The gated MLP's inner step over <paramref name="rows"/> rows of [g | u] (2·m wide each): g ← SiLU(g) ⊙ u in
    /// place, so the first m columns of each row (row stride 2·m) are the down projection's input.
    /// </summary>
    public static void SiluGate(Span<float> gateUp, int rows, int m)
    {
        for (int r = 0; r < rows; r++)
        {
            Span<float> g = gateUp.Slice(r * 2 * m, m);
            Silu(g);
            TensorPrimitives.Multiply(g, gateUp.Slice((r * 2 * m) + m, m), g);
        }
    }

    /// <summary>GELU, tanh approximation, in place: 0.5·x·(1 + tanh(√(2/π)·(x + 0.044715·x³))).</summary>
    public static void GeluTanh(Span<float> x)
    {
        const float SqrtTwoOverPi = 0.7978845608028654f;
        Span<float> t = stackalloc float[ActivationChunk];
        for (int i = 0; i < x.Length; i += ActivationChunk)
        {
            Span<float> xs = x.Slice(i, Math.Min(ActivationChunk, x.Length - i));
            Span<float> ts = t[..xs.Length];
            TensorPrimitives.Multiply(xs, xs, ts);                     // x²
            TensorPrimitives.Multiply(ts, 0.044715f, ts);
            TensorPrimitives.Add(ts, 1f, ts);                          // 1 + 0.044715·x²
            TensorPrimitives.Multiply(ts, xs, ts);                     // x + 0.044715·x³
            TensorPrimitives.Multiply(ts, SqrtTwoOverPi, ts);
            TensorPrimitives.Tanh(ts, ts);
            TensorPrimitives.Add(ts, 1f, ts);
            TensorPrimitives.Multiply(ts, xs, ts);
            TensorPrimitives.Multiply(ts, 0.5f, xs);
        }
    }

    /// <summary>Exact GELU in place: 0.5·x·(1 + erf(x/√2)), with <see cref="Erf"/>.</summary>
    public static void GeluErf(Span<float> x)
    {
        const double InvSqrt2 = 0.7071067811865476;
        for (int i = 0; i < x.Length; i++)
        {
            double v = x[i];
            x[i] = (float)(0.5 * v * (1.0 + Erf(v * InvSqrt2)));
        }
    }

    /// <summary>
    /// The error function, from the complementary function's Chebyshev fit in Numerical Recipes (2nd ed., §6.2,
    /// erfcc): fractional error below 1.2e-7 everywhere, ample for float32 activations.
    /// </summary>
    public static double Erf(double x)
    {
        double z = Math.Abs(x);
        double t = 1.0 / (1.0 + (0.5 * z));
        double poly = 0.17087277;
        poly = (poly * t) - 0.82215223;
        poly = (poly * t) + 1.48851587;
        poly = (poly * t) - 1.13520398;
        poly = (poly * t) + 0.27886807;
        poly = (poly * t) - 0.18628806;
        poly = (poly * t) + 0.09678418;
        poly = (poly * t) + 0.37409196;
        poly = (poly * t) + 1.00002368;
        poly = (poly * t) - 1.26551223;
        double erfc = t * Math.Exp((-z * z) + poly);
        return x >= 0 ? 1.0 - erfc : erfc - 1.0;
    }
}

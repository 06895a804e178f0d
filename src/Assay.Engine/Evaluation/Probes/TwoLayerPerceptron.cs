using System.Numerics.Tensors;
using Assay.Kernels;
using MathNet.Numerics.LinearAlgebra;
using MathNet.Numerics.Optimization;

namespace Assay.Evaluation;

/// <summary>
/// A perceptron with one hidden layer of tanh units and a softmax output over every class, fitted by MathNet.Numerics'
/// L-BFGS on scikit-learn's MLPClassifier objective: (1/n)·Σ_i −log softmax(W₂·tanh(W₁·x_i + b₁) + b₂)[y_i] +
/// (α/2n)·(‖W₁‖² + ‖W₂‖²), biases unpenalized, with α = 1/C so that C means what it means for the linear probe.
/// The start is Glorot's uniform initialization (weights and biases of a layer in ±√(6/(fan_in + fan_out)), as
/// scikit-learn draws it for tanh) from a seeded generator. tanh rather than a rectifier keeps the objective smooth,
/// which L-BFGS needs to stop at a well-defined point.
/// </summary>
internal sealed class TwoLayerPerceptron : IProbeModel
{
    /// <summary>Rows per parallel work item of the objective.</summary>
    private const int RowsPerChunk = 128;

    private readonly double[] _theta;

    private TwoLayerPerceptron(int features, int hidden, int classes, double[] theta, bool converged)
    {
        Features = features;
        Hidden = hidden;
        Classes = classes;
        _theta = theta;
        Converged = converged;
    }

    public int Features { get; }

    public int Hidden { get; }

    public int Classes { get; }

    /// <summary>False when the fit stopped at its iteration limit (the parameters are the best point it met).</summary>
    public bool Converged { get; }

    /// <summary>The parameters: W₁ (hidden × features, row-major), b₁, W₂ (classes × hidden), b₂.</summary>
    public ReadOnlySpan<double> Parameters => _theta;

    /// <summary>The number of parameters of this shape.</summary>
    public static int ParameterCount(int features, int hidden, int classes) => checked((hidden * features) + hidden + (classes * hidden) + classes);

    /// <summary>Glorot-uniform starting parameters for this shape, from <paramref name="seed"/>.</summary>
    public static double[] InitialParameters(int features, int hidden, int classes, ulong seed)
    {
        var rng = new Random(unchecked((int)seed) ^ 0x31a7);
        double[] theta = new double[ParameterCount(features, hidden, classes)];
        double first = Math.Sqrt(6.0 / (features + hidden)), second = Math.Sqrt(6.0 / (hidden + classes));
        int split = (hidden * features) + hidden;
        for (int i = 0; i < theta.Length; i++)
        {
            double bound = i < split ? first : second;
            theta[i] = ((2 * rng.NextDouble()) - 1) * bound;
        }
        return theta;
    }

    /// <summary>Fits n rows of d features (row-major) with labels 0 … k−1 from <paramref name="start"/> (default: <see cref="InitialParameters"/> of the seed).</summary>
    /// <exception cref="ArgumentException">Shapes disagree, a label is out of range, or C is not positive.</exception>
    public static TwoLayerPerceptron Fit(double[] x, int n, int d, int[] y, int classes, int hidden, double c, ulong seed,
        double[]? start = null, int maxIterations = 500, double tolerance = 1e-6)
    {
        ProbeFitting.CheckFit(x, n, d, y, classes, c);
        ArgumentOutOfRangeException.ThrowIfLessThan(hidden, 1);
        int count = ParameterCount(d, hidden, classes);
        double[] initial = start ?? InitialParameters(d, hidden, classes, seed);
        if (initial.Length != count)
        {
            throw new ArgumentException($"expected {count} starting parameters; got {initial.Length}");
        }

        double penalty = 1.0 / c / n;
        int chunks = (n + RowsPerChunk - 1) / RowsPerChunk;
        double bestValue = double.PositiveInfinity;
        double[] best = initial;
        var objective = ObjectiveFunction.Gradient(point =>
        {
            double[] t = point.AsArray() ?? point.ToArray();
            // Rows in fixed chunks, each summed on its own and the chunks added in order: the same value whatever
            // the thread count.
            double[][] grads = new double[chunks][];
            double[] losses = new double[chunks];
            Parallel.For(0, chunks, chunk =>
            {
                grads[chunk] = new double[count];
                losses[chunk] = Accumulate(t, x, y, d, hidden, classes, chunk * RowsPerChunk, Math.Min(n, (chunk + 1) * RowsPerChunk), grads[chunk]);
            });
            double[] grad = new double[count];
            double loss = 0;
            for (int chunk = 0; chunk < chunks; chunk++)
            {
                loss += losses[chunk];
                TensorPrimitives.Add(grad, grads[chunk], grad);
            }
            TensorPrimitives.Multiply(grad, 1.0 / n, grad);
            double norm = 0;
            foreach ((int from, int length) in WeightRanges(d, hidden, classes))
            {
                Span<double> w = t.AsSpan(from, length), g = grad.AsSpan(from, length);
                norm += TensorPrimitives.Dot(w, w);
                TensorPrimitives.MultiplyAdd(w, penalty, g, g);
            }
            double value = (loss / n) + (0.5 * penalty * norm);
            if (value < bestValue)
            {
                bestValue = value;
                best = (double[])t.Clone();
            }
            return (value, Vector<double>.Build.Dense(grad));
        });

        var minimizer = new LimitedMemoryBfgsMinimizer(tolerance, 0, 0, 10, maxIterations);
        try
        {
            MinimizationResult result = minimizer.FindMinimum(objective, Vector<double>.Build.Dense((double[])initial.Clone()));
            return new TwoLayerPerceptron(d, hidden, classes, result.MinimizingPoint.ToArray(), converged: true);
        }
        catch (OptimizationException)
        {
            // A non-convex fit may stop at the iteration limit or where the line search finds no lower point: keep
            // the lowest objective it evaluated, and say so.
            return new TwoLayerPerceptron(d, hidden, classes, best, converged: false);
        }
    }

    /// <summary>The penalized parts of θ: W₁ and W₂.</summary>
    private static (int From, int Length)[] WeightRanges(int d, int hidden, int classes) =>
        [(0, hidden * d), ((hidden * d) + hidden, classes * hidden)];

    /// <summary>Σ −log softmax over rows [start, end), adding the unscaled gradient to <paramref name="grad"/>.</summary>
    private static double Accumulate(double[] t, double[] x, int[] y, int d, int hidden, int classes, int start, int end, double[] grad)
    {
        int w2At = (hidden * d) + hidden, b2At = w2At + (classes * hidden);
        double loss = 0;
        double[] h = new double[hidden], z = new double[classes], logits = new double[classes], back = new double[hidden];
        for (int i = start; i < end; i++)
        {
            ReadOnlySpan<double> xi = x.AsSpan(i * d, d);
            Forward(t, xi, d, hidden, classes, h, z);
            z.CopyTo(logits, 0);
            loss -= CpuKernels.LogSoftmaxAt<double>(logits, y[i]);
            CpuKernels.SoftmaxInPlace<double>(z);
            Array.Clear(back);
            for (int j = 0; j < classes; j++)
            {
                double r = z[j] - (j == y[i] ? 1 : 0);
                Span<double> gw = grad.AsSpan(w2At + (j * hidden), hidden);
                TensorPrimitives.MultiplyAdd(h, r, gw, gw);
                grad[b2At + j] += r;
                TensorPrimitives.MultiplyAdd(t.AsSpan(w2At + (j * hidden), hidden), r, back, back);
            }
            for (int u = 0; u < hidden; u++)
            {
                double delta = back[u] * (1 - (h[u] * h[u]));
                Span<double> gw = grad.AsSpan(u * d, d);
                TensorPrimitives.MultiplyAdd(xi, delta, gw, gw);
                grad[(hidden * d) + u] += delta;
            }
        }
        return loss;
    }

    /// <summary>The hidden activations and the logits of one row.</summary>
    private static void Forward(ReadOnlySpan<double> t, ReadOnlySpan<double> row, int d, int hidden, int classes, Span<double> h, Span<double> z)
    {
        int w2At = (hidden * d) + hidden, b2At = w2At + (classes * hidden);
        for (int u = 0; u < hidden; u++)
        {
            h[u] = Math.Tanh(t[(hidden * d) + u] + TensorPrimitives.Dot(t.Slice(u * d, d), row));
        }
        for (int j = 0; j < classes; j++)
        {
            z[j] = t[b2At + j] + TensorPrimitives.Dot(t.Slice(w2At + (j * hidden), hidden), h);
        }
    }

    /// <summary>Class probabilities of one row.</summary>
    public void Probabilities(ReadOnlySpan<double> row, Span<double> p)
    {
        Span<double> h = Hidden <= 1024 ? stackalloc double[Hidden] : new double[Hidden];
        Forward(_theta, row, Features, Hidden, Classes, h, p[..Classes]);
        CpuKernels.SoftmaxInPlace(p[..Classes]);
    }
}

using Assay.Kernels;
using MathNet.Numerics.LinearAlgebra;
using MathNet.Numerics.Optimization;

namespace Assay.Evaluation;

/// <summary>
/// Multinomial logistic regression with an L2 penalty on the weights (not the intercepts), fitted by MathNet.Numerics'
/// L-BFGS. It minimizes C · Σ_i −log softmax(W·x_i + b)[y_i] + ½‖W‖², the objective of scikit-learn's
/// LogisticRegression(multi_class="multinomial", penalty="l2", C) — scaled here by 1/(C·n), which moves no minimum,
/// so the tolerances do not depend on n. The intercepts are determined up to a common constant; they are centred.
/// </summary>
internal sealed class LogisticRegression : IProbeModel
{
    /// <summary>Rows per parallel work item of the objective.</summary>
    private const int RowsPerChunk = 256;

    private LogisticRegression(int classes, int features, double[] weights, double[] intercepts, int iterations)
    {
        Classes = classes;
        Features = features;
        Weights = weights;
        Intercepts = intercepts;
        Iterations = iterations;
    }

    public int Classes { get; }

    public int Features { get; }

    /// <summary>W, classes × features, row-major.</summary>
    public double[] Weights { get; }

    /// <summary>b, one per class, summing to 0.</summary>
    public double[] Intercepts { get; }

    /// <summary>L-BFGS iterations taken.</summary>
    public int Iterations { get; }

    /// <summary>Fits n rows of d features (row-major) with labels 0 … k−1.</summary>
    /// <exception cref="ArgumentException">Shapes disagree, a label is out of range, or C is not positive.</exception>
    public static LogisticRegression Fit(double[] x, int n, int d, int[] y, int classes, double c, int maxIterations = 1000, double tolerance = 1e-8)
    {
        ProbeFitting.CheckFit(x, n, d, y, classes, c);

        int k = classes;
        double scale = 1.0 / n, penalty = 1.0 / (c * n);
        int chunks = (n + RowsPerChunk - 1) / RowsPerChunk;
        var objective = ObjectiveFunction.Gradient(theta =>
        {
            double[] t = theta.AsArray() ?? theta.ToArray();
            // Rows in fixed chunks, each summed on its own and the chunks added in order: the same value whatever
            // the thread count.
            double[][] grads = new double[chunks][];
            double[] losses = new double[chunks];
            Parallel.For(0, chunks, chunk =>
            {
                grads[chunk] = new double[t.Length];
                losses[chunk] = Accumulate(t, x, y, d, k, chunk * RowsPerChunk, Math.Min(n, (chunk + 1) * RowsPerChunk), grads[chunk]);
            });
            double[] grad = new double[t.Length];
            double loss = 0;
            for (int chunk = 0; chunk < chunks; chunk++)
            {
                loss += losses[chunk];
                double[] g = grads[chunk];
                for (int i = 0; i < grad.Length; i++)
                {
                    grad[i] += g[i];
                }
            }
            double norm = 0;
            for (int i = 0; i < grad.Length; i++)
            {
                grad[i] *= scale;
            }
            for (int i = 0; i < k * d; i++)
            {
                norm += t[i] * t[i];
                grad[i] += penalty * t[i];
            }
            return ((loss * scale) + (0.5 * penalty * norm), Vector<double>.Build.Dense(grad));
        });

        var minimizer = new LimitedMemoryBfgsMinimizer(tolerance, tolerance, tolerance, 10, maxIterations);
        MinimizationResult result = minimizer.FindMinimum(objective, Vector<double>.Build.Dense((k * d) + k));
        double[] theta = result.MinimizingPoint.ToArray();
        double[] intercepts = theta[(k * d)..];
        double mean = intercepts.Average();
        for (int j = 0; j < k; j++)
        {
            intercepts[j] -= mean;
        }
        return new LogisticRegression(k, d, theta[..(k * d)], intercepts, result.Iterations);
    }

    /// <summary>Σ −log softmax(W·x_i + b)[y_i] over rows [start, end), adding the unscaled gradient to <paramref name="grad"/>.</summary>
    private static double Accumulate(double[] t, double[] x, int[] y, int d, int k, int start, int end, double[] grad)
    {
        double loss = 0;
        double[] z = new double[k];
        double[] logits = new double[k];
        for (int i = start; i < end; i++)
        {
            ReadOnlySpan<double> xi = x.AsSpan(i * d, d);
            for (int j = 0; j < k; j++)
            {
                double s = t[(k * d) + j] + System.Numerics.Tensors.TensorPrimitives.Dot(t.AsSpan(j * d, d), xi);
                z[j] = s;
            }
            z.CopyTo(logits, 0);
            loss -= CpuKernels.LogSoftmaxAt<double>(logits, y[i]);
            CpuKernels.SoftmaxInPlace<double>(z);
            for (int j = 0; j < k; j++)
            {
                double r = z[j] - (j == y[i] ? 1 : 0);
                Span<double> g = grad.AsSpan(j * d, d);
                System.Numerics.Tensors.TensorPrimitives.MultiplyAdd(xi, r, g, g);
                grad[(k * d) + j] += r;
            }
        }
        return loss;
    }

    /// <summary>A fitted model from its parameters (as a saved probe holds them).</summary>
    public static LogisticRegression FromParameters(int classes, int features, double[] weights, double[] intercepts) =>
        weights.Length == classes * features && intercepts.Length == classes
            ? new LogisticRegression(classes, features, weights, intercepts, 0)
            : throw new ArgumentException($"expected {classes} × {features} weights and {classes} intercepts");

    /// <summary>Class probabilities of one row.</summary>
    public void Probabilities(ReadOnlySpan<double> row, Span<double> p)
    {
        for (int j = 0; j < Classes; j++)
        {
            double s = Intercepts[j];
            ReadOnlySpan<double> w = Weights.AsSpan(j * Features, Features);
            for (int f = 0; f < Features; f++)
            {
                s += w[f] * row[f];
            }
            p[j] = s;
        }
        CpuKernels.SoftmaxInPlace(p[..Classes]);
    }
}

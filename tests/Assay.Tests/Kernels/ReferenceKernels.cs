namespace Assay.Tests.Kernels;

/// <summary>Plain float64 references of every kernel, written straight from the formulas, for comparing the fast paths.</summary>
internal static class ReferenceKernels
{
    /// <summary>C = A·B + bias (+ C0), A M×K, B K×N row-major.</summary>
    public static double[] Gemm(float[] a, float[] b, float[]? bias, float[]? c0, int m, int k, int n)
    {
        double[] c = new double[m * n];
        for (int i = 0; i < m; i++)
        {
            for (int j = 0; j < n; j++)
            {
                double s = (c0?[(i * n) + j] ?? 0) + (bias?[j] ?? 0);
                for (int p = 0; p < k; p++)
                {
                    s += (double)a[(i * k) + p] * b[(p * n) + j];
                }
                c[(i * n) + j] = s;
            }
        }
        return c;
    }

    public static double[] LayerNorm(float[] x, float[] g, float[] b, int rows, double eps)
    {
        int n = g.Length;
        double[] y = new double[x.Length];
        for (int r = 0; r < rows; r++)
        {
            double mean = 0, v = 0;
            for (int i = 0; i < n; i++)
            {
                mean += x[(r * n) + i];
            }
            mean /= n;
            for (int i = 0; i < n; i++)
            {
                v += (x[(r * n) + i] - mean) * (x[(r * n) + i] - mean);
            }
            v /= n;
            for (int i = 0; i < n; i++)
            {
                y[(r * n) + i] = ((x[(r * n) + i] - mean) / Math.Sqrt(v + eps) * g[i]) + b[i];
            }
        }
        return y;
    }

    public static double[] Softmax(float[] x)
    {
        double max = x.Max();
        double[] e = x.Select(v => Math.Exp(v - max)).ToArray();
        double s = e.Sum();
        return e.Select(v => v / s).ToArray();
    }

    public static double GeluTanh(double x) => 0.5 * x * (1 + Math.Tanh(Math.Sqrt(2 / Math.PI) * (x + (0.044715 * x * x * x))));

    /// <summary>Causal attention of one head, straight from softmax(q·kᵀ/√hd + mask)·v.</summary>
    public static double[] Attention(float[] qkv, int length, int width, int head, int hd)
    {
        double[] o = new double[length * width];
        int stride = 3 * width;
        for (int t = 0; t < length; t++)
        {
            double[] s = new double[t + 1];
            for (int j = 0; j <= t; j++)
            {
                double dot = 0;
                for (int i = 0; i < hd; i++)
                {
                    dot += (double)qkv[(t * stride) + (head * hd) + i] * qkv[(j * stride) + width + (head * hd) + i];
                }
                s[j] = dot / Math.Sqrt(hd);
            }
            double max = s.Max();
            double sum = 0;
            for (int j = 0; j <= t; j++)
            {
                s[j] = Math.Exp(s[j] - max);
                sum += s[j];
            }
            for (int j = 0; j <= t; j++)
            {
                for (int i = 0; i < hd; i++)
                {
                    o[(t * width) + (head * hd) + i] += s[j] / sum * qkv[(j * stride) + (2 * width) + (head * hd) + i];
                }
            }
        }
        return o;
    }
}

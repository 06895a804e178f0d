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

    /// <summary>Causal attention of one query head (reading key/value head head / (heads / kvHeads), within the last <paramref name="window"/> positions when positive), straight from softmax(q·kᵀ/√hd + mask)·v.</summary>
    public static double[] Attention(float[] qkv, int length, int heads, int kvHeads, int hd, int window, int head)
    {
        int width = heads * hd;
        int stride = (heads + (2 * kvHeads)) * hd;
        int kv = head / (heads / kvHeads);
        int k0 = (heads + kv) * hd, v0 = (heads + kvHeads + kv) * hd;
        double[] o = new double[length * width];
        for (int t = 0; t < length; t++)
        {
            int first = window > 0 ? Math.Max(0, t - window + 1) : 0;
            double[] s = new double[t + 1];
            for (int j = first; j <= t; j++)
            {
                double dot = 0;
                for (int i = 0; i < hd; i++)
                {
                    dot += (double)qkv[(t * stride) + (head * hd) + i] * qkv[(j * stride) + k0 + i];
                }
                s[j] = dot / Math.Sqrt(hd);
            }
            double max = double.NegativeInfinity;
            for (int j = first; j <= t; j++)
            {
                max = Math.Max(max, s[j]);
            }
            double sum = 0;
            for (int j = first; j <= t; j++)
            {
                s[j] = Math.Exp(s[j] - max);
                sum += s[j];
            }
            for (int j = first; j <= t; j++)
            {
                for (int i = 0; i < hd; i++)
                {
                    o[(t * width) + (head * hd) + i] += s[j] / sum * qkv[(j * stride) + v0 + i];
                }
            }
        }
        return o;
    }
}

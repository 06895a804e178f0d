using Assay.Config;
using Assay.Kernels;
using Assay.Model.Blocks;
using static Assay.Kernels.CpuKernels;

namespace Assay.Model.Gpt2;

/// <summary>
/// A GPT-2 block, pre-norm and sequential: x += proj(attention(LayerNorm₁(x))); x += down(act(up(LayerNorm₂(x)))),
/// with fused q/k/v, biases on every projection, and the activation fused into the up-projection's epilogue. The
/// residual adds are the accumulate form of the two output GEMMs.
/// </summary>
internal sealed class Gpt2Block(LayerNormParameters norm1, PackedMatrix attention, PackedMatrix attentionOut,
    LayerNormParameters norm2, PackedMatrix mlpIn, PackedMatrix mlpOut, int heads, Activation activation) : ITransformerBlock
{
    public long Bytes => norm1.Bytes + attention.Bytes + attentionOut.Bytes + norm2.Bytes + mlpIn.Bytes + mlpOut.Bytes;

    public void Apply(float[] x, float[] scratch, ForwardBatch batch)
    {
        int t = batch.Total, d = attention.Rows, m = mlpIn.Columns;
        KernelVariant variant = batch.Variant;
        ParallelOptions parallel = batch.Parallel;
        // Working buffers come from the shared pool (each is fully written before it is read), so a long run's
        // batches reuse them instead of leaving large-object garbage per pass.
        System.Buffers.ArrayPool<float> pool = System.Buffers.ArrayPool<float>.Shared;
        float[] qkv = pool.Rent(t * 3 * d);
        float[] attn = pool.Rent(t * d);
        float[] mlp = pool.Rent(t * m);
        try
        {
            norm1.Apply(x, scratch, t, batch);
            Gemm(scratch, t, d, attention, qkv, 3 * d, accumulate: false, variant, parallel);
            CausalSelfAttention.Run(qkv, attn, new AttentionShape(heads, heads, d / heads, Window: 0), batch);
            Gemm(attn, t, d, attentionOut, x, d, accumulate: true, variant, parallel);

            norm2.Apply(x, scratch, t, batch);
            Gemm(scratch, t, d, mlpIn, mlp, m, accumulate: false, variant, parallel, epilogue: activation);
            Gemm(mlp, t, m, mlpOut, x, d, accumulate: true, variant, parallel);
        }
        finally
        {
            pool.Return(qkv);
            pool.Return(attn);
            pool.Return(mlp);
        }
    }
}

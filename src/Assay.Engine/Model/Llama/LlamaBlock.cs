using Assay.Kernels;
using Assay.Model.Blocks;
using static Assay.Kernels.CpuKernels;

namespace Assay.Model.Llama;

/// <summary>
/// A Llama-style block (Llama, Mistral, Qwen2), pre-norm and sequential:
/// x += o(attention(rotary(q, k), v)) of RMSNorm₁(x); x += down(SiLU(gate(h)) ⊙ up(h)) with h = RMSNorm₂(x).
/// q, k and v are one packed product (with Qwen2's biases); gate and up are one product whose halves the gate step
/// combines in place; the residual adds are the accumulate form of the two output GEMMs.
/// </summary>
internal sealed class LlamaBlock(RmsNormParameters norm1, PackedMatrix queryKeyValue, PackedMatrix output, RmsNormParameters norm2,
    PackedMatrix gateUp, PackedMatrix down, AttentionShape shape, RotaryEmbedding rotary) : ITransformerBlock
{
    public long Bytes => norm1.Bytes + queryKeyValue.Bytes + output.Bytes + norm2.Bytes + gateUp.Bytes + down.Bytes;

    public void Apply(float[] x, float[] scratch, ForwardBatch batch)
    {
        int t = batch.Total, d = queryKeyValue.Rows, m = down.Rows, rowWidth = shape.RowWidth, q = shape.Heads * shape.HeadWidth;
        KernelVariant variant = batch.Variant;
        ParallelOptions parallel = batch.Parallel;
        System.Buffers.ArrayPool<float> pool = System.Buffers.ArrayPool<float>.Shared;
        float[] qkv = pool.Rent(t * rowWidth);
        float[] attn = pool.Rent(t * q);
        float[] mlp = pool.Rent(t * 2 * m);
        try
        {
            norm1.Apply(x, scratch, t, batch);
            Gemm(scratch, t, d, queryKeyValue, qkv, rowWidth, accumulate: false, variant, parallel);
            rotary.Apply(qkv, rowWidth, shape.Heads + shape.KeyValueHeads, shape.HeadWidth, batch);
            CausalSelfAttention.Run(qkv, attn, shape, batch);
            Gemm(attn, t, q, output, x, d, accumulate: true, variant, parallel);

            norm2.Apply(x, scratch, t, batch);
            Gemm(scratch, t, d, gateUp, mlp, 2 * m, accumulate: false, variant, parallel);
            batch.ForRowBlocks(t, (first, count) => SiluGate(mlp.AsSpan(first * 2 * m, count * 2 * m), count, m));
            Gemm(mlp, t, 2 * m, down, x, d, accumulate: true, variant, parallel);
        }
        finally
        {
            pool.Return(qkv);
            pool.Return(attn);
            pool.Return(mlp);
        }
    }
}

using Assay.Config;
using Assay.Kernels;
using Assay.Model.Blocks;
using static Assay.Kernels.CpuKernels;

namespace Assay.Model.NeoX;

/// <summary>
/// A NeoX block: LayerNorms with biases, q/k/v as one product (de-interleaved from the checkpoint's per-head layout at
/// load), partial rotary positions, biases on every projection, a plain MLP with its activation in the up-projection's
/// epilogue. Parallel residual: x += attn(LN₁(x)) + mlp(LN₂(x)), both norms of the block's input; sequential:
/// x += attn(LN₁(x)), then x += mlp(LN₂(x)).
/// </summary>
internal sealed class NeoXBlock(LayerNormParameters norm1, PackedMatrix queryKeyValue, PackedMatrix output, LayerNormParameters norm2,
    PackedMatrix up, PackedMatrix down, AttentionShape shape, RotaryEmbedding rotary, Activation activation, bool parallelResidual) : ITransformerBlock
{
    public long Bytes => norm1.Bytes + queryKeyValue.Bytes + output.Bytes + norm2.Bytes + up.Bytes + down.Bytes;

    public void Apply(float[] x, float[] scratch, ForwardBatch batch)
    {
        int t = batch.Total, d = queryKeyValue.Rows, m = up.Columns, rowWidth = shape.RowWidth;
        KernelVariant variant = batch.Variant;
        ParallelOptions parallel = batch.Parallel;
        System.Buffers.ArrayPool<float> pool = System.Buffers.ArrayPool<float>.Shared;
        float[] qkv = pool.Rent(t * rowWidth);
        float[] attn = pool.Rent(t * d);
        float[] mlp = pool.Rent(t * m);
        // The MLP's norm of the block input, taken before attention changes x (parallel residual only).
        float[]? mlpInput = parallelResidual ? pool.Rent(t * d) : null;
        try
        {
            norm1.Apply(x, scratch, t, batch);
            if (mlpInput is not null)
            {
                norm2.Apply(x, mlpInput, t, batch);
            }
            Gemm(scratch, t, d, queryKeyValue, qkv, rowWidth, accumulate: false, variant, parallel);
            rotary.Apply(qkv, rowWidth, 2 * shape.Heads, shape.HeadWidth, batch);
            CausalSelfAttention.Run(qkv, attn, shape, batch);
            Gemm(attn, t, d, output, x, d, accumulate: true, variant, parallel);

            if (mlpInput is null)
            {
                norm2.Apply(x, scratch, t, batch);
            }
            Gemm(mlpInput ?? scratch, t, d, up, mlp, m, accumulate: false, variant, parallel, epilogue: activation);
            Gemm(mlp, t, m, down, x, d, accumulate: true, variant, parallel);
        }
        finally
        {
            pool.Return(qkv);
            pool.Return(attn);
            pool.Return(mlp);
            if (mlpInput is not null)
            {
                pool.Return(mlpInput);
            }
        }
    }
}

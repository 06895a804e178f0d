namespace Assay.Model;

/// <summary>
/// What a forward pass over a batch of sequences kept: the requested layers' hidden states at every position, and
/// logits where requested. Sequences keep their own lengths; nothing is padded.
/// </summary>
public sealed class ForwardResult
{
    private readonly int[] _starts;
    private readonly int[] _lengths;
    private readonly Dictionary<int, float[]> _hidden;
    private readonly float[] _logits;
    private readonly LogitPositions _logitPositions;

    internal ForwardResult(int width, int vocabularySize, int[] starts, int[] lengths,
        Dictionary<int, float[]> hidden, float[] logits, LogitPositions logitPositions)
    {
        Width = width;
        VocabularySize = vocabularySize;
        _starts = starts;
        _lengths = lengths;
        _hidden = hidden;
        _logits = logits;
        _logitPositions = logitPositions;
    }

    /// <summary>Hidden width d.</summary>
    public int Width { get; }

    /// <summary>Length of each logits row, V.</summary>
    public int VocabularySize { get; }

    /// <summary>Number of sequences in the batch.</summary>
    public int SequenceCount => _lengths.Length;

    /// <summary>Tokens in sequence <paramref name="sequence"/>.</summary>
    public int Length(int sequence) => _lengths[sequence];

    /// <summary>The layers kept, ascending.</summary>
    public IEnumerable<int> HiddenLayers => _hidden.Keys.Order();

    /// <summary>The hidden state (d values) of one position in one layer.</summary>
    /// <exception cref="ArgumentException">The layer was not requested.</exception>
    public ReadOnlySpan<float> HiddenState(int layer, int sequence, int position)
    {
        if (!_hidden.TryGetValue(layer, out float[]? states))
        {
            throw new ArgumentException($"layer {layer} was not requested in ForwardOptions.HiddenLayers", nameof(layer));
        }
        CheckPosition(sequence, position);
        return states.AsSpan((_starts[sequence] + position) * Width, Width);
    }

    /// <summary>Logits (V values) after the last token of a sequence.</summary>
    public ReadOnlySpan<float> LastLogits(int sequence) => Logits(sequence, _lengths[sequence] - 1);

    /// <summary>The next-token distribution after the last token of a sequence: softmax of <see cref="LastLogits"/>.</summary>
    public void NextTokenProbabilities(int sequence, Span<float> destination)
    {
        ReadOnlySpan<float> logits = LastLogits(sequence);
        if (destination.Length != logits.Length)
        {
            throw new ArgumentException($"destination holds {destination.Length} values; expected {logits.Length}", nameof(destination));
        }
        logits.CopyTo(destination);
        OutputHead.Softmax(destination);
    }

    /// <summary>
    /// log p(<paramref name="token"/>) after position <paramref name="position"/> of a sequence: the log-softmax of that
    /// position's logits at the token, in float64 (a corpus's cross-entropy sums millions of these terms).
    /// </summary>
    /// <exception cref="InvalidOperationException">Logits were not computed at that position.</exception>
    public double LogProbability(int sequence, int position, int token)
    {
        ReadOnlySpan<float> logits = Logits(sequence, position);
        ArgumentOutOfRangeException.ThrowIfNegative(token);
        ArgumentOutOfRangeException.ThrowIfGreaterThanOrEqual(token, logits.Length);
        double[] scratch = System.Buffers.ArrayPool<double>.Shared.Rent(logits.Length);
        try
        {
            Span<double> x = scratch.AsSpan(0, logits.Length);
            System.Numerics.Tensors.TensorPrimitives.ConvertChecked<float, double>(logits, x);
            return Assay.Kernels.CpuKernels.LogSoftmaxAt<double>(x, token);
        }
        finally
        {
            System.Buffers.ArrayPool<double>.Shared.Return(scratch);
        }
    }

    /// <summary>Logits (V values) after position <paramref name="position"/> of a sequence.</summary>
    /// <exception cref="InvalidOperationException">Logits were not computed at that position.</exception>
    public ReadOnlySpan<float> Logits(int sequence, int position)
    {
        CheckPosition(sequence, position);
        long row = _logitPositions switch
        {
            LogitPositions.All => _starts[sequence] + position,
            LogitPositions.Last when position == _lengths[sequence] - 1 => sequence,
            _ => throw new InvalidOperationException(
                $"logits at position {position} of sequence {sequence} were not computed (ForwardOptions.Logits = {_logitPositions})"),
        };
        return _logits.AsSpan((int)(row * VocabularySize), VocabularySize);
    }

    private void CheckPosition(int sequence, int position)
    {
        ArgumentOutOfRangeException.ThrowIfNegative(sequence);
        ArgumentOutOfRangeException.ThrowIfGreaterThanOrEqual(sequence, _lengths.Length);
        ArgumentOutOfRangeException.ThrowIfNegative(position);
        ArgumentOutOfRangeException.ThrowIfGreaterThanOrEqual(position, _lengths[sequence]);
    }
}

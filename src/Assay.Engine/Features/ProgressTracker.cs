using System.Diagnostics;

namespace Assay.Features;

/// <summary>Counts rows and tokens across the groups of one extraction and reports them.</summary>
internal sealed class ProgressTracker(IProgress<ExtractionProgress>? progress)
{
    private readonly Stopwatch _clock = Stopwatch.StartNew();
    private long _rows, _tokens;

    public long Rows => _rows;

    public long Tokens => _tokens;

    public void Add(int rows, int tokens)
    {
        _rows += rows;
        _tokens += tokens;
        progress?.Report(new ExtractionProgress(_rows, _tokens, _clock.Elapsed));
    }
}

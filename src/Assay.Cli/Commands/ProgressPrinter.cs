using System.Diagnostics;
using System.Globalization;
using Assay.Features;
using Assay.Output;

namespace Assay.Cli.Commands;

/// <summary>
/// One progress line on stderr: on a terminal redrawn in place every half second, otherwise a plain line every
/// interval; <see cref="End"/> writes the last state. What the line says is the subclass's.
/// </summary>
internal abstract class ProgressLine<T>(TextWriter err, bool interactive, TimeSpan interval) : IProgress<T>
    where T : struct
{
    private readonly Stopwatch _sinceLine = Stopwatch.StartNew();
    private T? _last;
    private bool _drawn;

    public void Report(T value)
    {
        _last = value;
        Started(value);
        if (_sinceLine.Elapsed >= (interactive ? TimeSpan.FromMilliseconds(500) : interval))
        {
            Write(value);
            _sinceLine.Restart();
        }
    }

    /// <summary>The last state, then a line break on a terminal.</summary>
    public void End()
    {
        if (_last is T last)
        {
            Write(last);
        }
        if (interactive && _drawn)
        {
            err.WriteLine();
        }
    }

    /// <summary>
    /// Forgets the last state and, on a terminal, blanks the line drawn so far, so another line can be written in its
    /// place (the study's log between its steps).
    /// </summary>
    public void Clear()
    {
        _last = null;
        if (interactive && _drawn)
        {
            err.Write("\r" + new string(' ', 100) + "\r");
            _drawn = false;
        }
    }

    /// <summary>Called with every report before the line is written (to remember where this session began).</summary>
    protected virtual void Started(T value)
    {
    }

    protected abstract string Format(T value);

    protected static string Clock(TimeSpan t) =>
        string.Create(CultureInfo.InvariantCulture, $"{(int)t.TotalHours}:{t.Minutes:D2}:{t.Seconds:D2}");

    /// <summary>"ETA h:mm:ss" from the share done since this session began, seconds spent and the share left.</summary>
    protected static string Eta(double doneShare, double leftShare, double seconds, string finished = "input read") =>
        doneShare > 0 && leftShare > 0 ? "ETA " + Clock(TimeSpan.FromSeconds(seconds * leftShare / doneShare)) : leftShare <= 0 ? finished : "ETA …";

    protected static string Rate(long tokens, TimeSpan elapsed) =>
        elapsed.TotalSeconds > 0 ? string.Create(CultureInfo.InvariantCulture, $"{tokens / elapsed.TotalSeconds:N0} tokens/s") : "";

    private void Write(T value)
    {
        string line = Format(value);
        if (interactive)
        {
            err.Write("\r" + line.PadRight(100));
            _drawn = true;
        }
        else
        {
            err.WriteLine(line);
        }
    }
}

/// <summary>
/// Progress of a run: rows done, records read and rejected, tokens/s and an ETA from the share of the input read.
/// </summary>
internal sealed class ProgressPrinter(TextWriter err, bool interactive, TimeSpan interval) : ProgressLine<RunProgress>(err, interactive, interval)
{
    private double? _firstFraction;

    protected override void Started(RunProgress value) => _firstFraction ??= value.InputFraction;

    protected override string Format(RunProgress p)
    {
        string head = string.Create(CultureInfo.InvariantCulture, $"assay: {p.Accepted:N0} rows, {p.Read:N0} records read ({p.Rejected:N0} rejected), ");
        // From a pipe the input's size is unknown: no share of it and no ETA.
        return p.InputFraction is double f
            ? head + string.Create(CultureInfo.InvariantCulture, $"{f:P0} of input, {Rate(p.Tokens, p.Elapsed)}, {Clock(p.Elapsed)} elapsed, {Eta(f - (_firstFraction ?? 0), 1 - f, p.Elapsed.TotalSeconds)}")
            : head + string.Create(CultureInfo.InvariantCulture, $"{Rate(p.Tokens, p.Elapsed)}, {Clock(p.Elapsed)} elapsed (input from a pipe: no ETA)");
    }
}

/// <summary>
/// Progress of texts through the model (zero-shot, cross-entropy): texts done of the total (or the share of the input
/// read, when the total is not known up front), tokens/s and an ETA.
/// </summary>
internal sealed class TextProgressPrinter(TextWriter err, bool interactive, TimeSpan interval, long? total, Func<double?>? inputFraction = null)
    : ProgressLine<ExtractionProgress>(err, interactive, interval)
{
    /// <summary>A printer on stderr: redrawn on a terminal, a line every 10 s otherwise.</summary>
    public static TextProgressPrinter ForConsole(TextWriter err, long? total, Func<double?>? inputFraction = null) =>
        new(err, !Console.IsErrorRedirected && ReferenceEquals(err, Console.Error), TimeSpan.FromSeconds(10), total, inputFraction);

    protected override string Format(ExtractionProgress p)
    {
        CultureInfo inv = CultureInfo.InvariantCulture;
        double? share = total is long n && n > 0 ? (double)p.Rows / n : inputFraction?.Invoke();
        string count = total is long t ? string.Create(inv, $"{p.Rows:N0} of {t:N0} texts")
            : share is double f ? string.Create(inv, $"{p.Rows:N0} texts, {f:P0} of input") : string.Create(inv, $"{p.Rows:N0} texts");
        string eta = share is double s ? Eta(s, 1 - s, p.Elapsed.TotalSeconds) : "input from a pipe: no ETA";
        return string.Create(inv, $"assay: {count}, {p.Tokens:N0} tokens, {Rate(p.Tokens, p.Elapsed)}, {Clock(p.Elapsed)} elapsed, {eta}");
    }
}

/// <summary>Progress of a probe's search for C: values done of all, the last C and its cross-validated log loss, an ETA.</summary>
internal sealed class SearchProgressPrinter(TextWriter err, bool interactive, TimeSpan interval)
    : ProgressLine<Assay.Evaluation.ProbeSearchProgress>(err, interactive, interval)
{
    /// <summary>A printer on stderr: redrawn on a terminal, a line every 10 s otherwise.</summary>
    public static SearchProgressPrinter ForConsole(TextWriter err) =>
        new(err, !Console.IsErrorRedirected && ReferenceEquals(err, Console.Error), TimeSpan.FromSeconds(10));

    protected override string Format(Assay.Evaluation.ProbeSearchProgress p)
    {
        double share = p.Count == 0 ? 1 : (double)p.Done / p.Count;
        return string.Create(CultureInfo.InvariantCulture,
            $"assay: C {p.Done} of {p.Count} cross-validated (C = {p.C:G4}: log loss {p.LogLoss:F4}), {Clock(p.Elapsed)} elapsed, {Eta(share, 1 - share, p.Elapsed.TotalSeconds, "refitting on all rows")}");
    }
}

/// <summary>Progress of a study: the step (of all), what it computes, units done of all in it, tokens/s and the step's ETA.</summary>
internal sealed class StudyProgressPrinter(TextWriter err, bool interactive, TimeSpan interval)
    : ProgressLine<Assay.Evaluation.StudyProgress>(err, interactive, interval)
{
    /// <summary>A printer on stderr: redrawn on a terminal, a line every 10 s otherwise.</summary>
    public static StudyProgressPrinter ForConsole(TextWriter err) =>
        new(err, !Console.IsErrorRedirected && ReferenceEquals(err, Console.Error), TimeSpan.FromSeconds(10));

    protected override string Format(Assay.Evaluation.StudyProgress p)
    {
        double share = p.Total > 0 ? (double)p.Done / p.Total : 0;
        string rate = p.Tokens > 0 ? ", " + Rate(p.Tokens, p.Elapsed) : "";
        return string.Create(CultureInfo.InvariantCulture,
            $"assay: step {p.Index} of {p.Count} ({p.Step}): {p.Done:N0} of {p.Total:N0} {p.Unit}{rate}, {Clock(p.Elapsed)} elapsed, step {Eta(share, 1 - share, p.Elapsed.TotalSeconds, "finishing")}");
    }
}

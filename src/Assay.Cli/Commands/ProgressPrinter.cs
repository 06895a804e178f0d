using System.Diagnostics;
using System.Globalization;
using Assay.Output;

namespace Assay.Cli.Commands;

/// <summary>
/// Progress of a run on stderr: rows done, records read and rejected, tokens/s and an ETA from the share of the input
/// read. On a terminal one line is redrawn in place; otherwise a plain line is written every interval (and at the end).
/// </summary>
internal sealed class ProgressPrinter(TextWriter err, bool interactive, TimeSpan interval) : IProgress<RunProgress>
{
    private readonly Stopwatch _sinceLine = Stopwatch.StartNew();
    private double? _firstFraction;
    private RunProgress? _last;
    private bool _drawn;

    public void Report(RunProgress value)
    {
        _last = value;
        _firstFraction ??= value.InputFraction;
        TimeSpan every = interactive ? TimeSpan.FromMilliseconds(500) : interval;
        if (_sinceLine.Elapsed >= every)
        {
            Write(value);
            _sinceLine.Restart();
        }
    }

    /// <summary>The last state, then a line break on a terminal.</summary>
    public void End()
    {
        if (_last is RunProgress last)
        {
            Write(last);
        }
        if (interactive && _drawn)
        {
            err.WriteLine();
        }
    }

    private void Write(RunProgress p)
    {
        CultureInfo inv = CultureInfo.InvariantCulture;
        double seconds = p.Elapsed.TotalSeconds;
        string rate = seconds > 0 ? string.Create(inv, $"{p.Tokens / seconds:N0} tokens/s") : "";
        double done = p.InputFraction - (_firstFraction ?? 0);
        double left = 1 - p.InputFraction;
        string eta = done > 0 && left > 0 ? "ETA " + Clock(TimeSpan.FromSeconds(seconds * left / done)) : left <= 0 ? "input read" : "ETA …";
        string line = string.Create(inv,
            $"assay: {p.Accepted:N0} rows, {p.Read:N0} records read ({p.Rejected:N0} rejected), {p.InputFraction:P0} of input, {rate}, {Clock(p.Elapsed)} elapsed, {eta}");
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

    private static string Clock(TimeSpan t) =>
        string.Create(CultureInfo.InvariantCulture, $"{(int)t.TotalHours}:{t.Minutes:D2}:{t.Seconds:D2}");
}

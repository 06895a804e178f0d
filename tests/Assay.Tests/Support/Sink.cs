namespace Assay.Tests.Support;

/// <summary>Collects what a progress reports, on the reporting thread, in order.</summary>
public sealed class Sink<T>(List<T> items) : IProgress<T>
{
    public void Report(T value) => items.Add(value);
}

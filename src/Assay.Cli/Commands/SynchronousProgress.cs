namespace Assay.Cli.Commands;

/// <summary>Reports on the calling thread, in order (Progress&lt;T&gt; would post to the thread pool).</summary>
internal sealed class SynchronousProgress<T>(Action<T> report) : IProgress<T>
{
    public void Report(T value) => report(value);
}

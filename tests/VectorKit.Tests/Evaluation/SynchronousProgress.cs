using System.Collections.Concurrent;

namespace VectorKit.Tests.Evaluation;

/// <summary>Records every report on the reporting thread (Progress&lt;T&gt; would post them later, out of order).</summary>
internal sealed class SynchronousProgress<T> : IProgress<T>
{
    private readonly ConcurrentQueue<T> _values = new();

    public IReadOnlyList<T> Values => _values.ToArray();

    public void Report(T value) => _values.Enqueue(value);
}

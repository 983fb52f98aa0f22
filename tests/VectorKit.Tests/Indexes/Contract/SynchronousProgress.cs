namespace VectorKit.Tests.Indexes.Contract;

/// <summary>
/// Progress that runs its handler on the reporting thread, at once (<see cref="Progress{T}"/> posts to a
/// synchronization context, too late for a test that cancels from the first report or reads the last one).
/// </summary>
internal sealed class SynchronousProgress<T>(Action<T> handler) : IProgress<T>
{
    public void Report(T value) => handler(value);
}

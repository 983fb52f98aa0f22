using VectorKit.Indexes;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>Asserts that loading bytes fails with the library's exception, promptly and without allocating much beyond the input.</summary>
internal static class Rejection
{
    // Far above any legitimate load of these small inputs; only a hang reaches it. A guard, not a timing assertion.
    private static readonly TimeSpan HangLimit = TimeSpan.FromSeconds(60);

    /// <summary>Managed bytes a rejected load may allocate beyond a few times its input: index shells, messages, stack traces.</summary>
    public const long AllocationAllowance = 512 * 1024;

    public static IndexFileException Assert(byte[] file, IndexLoadOptions? options = null, Func<byte[], Stream>? open = null)
    {
        (Exception? error, long allocated) = Run(file, options, open);
        var rejected = Xunit.Assert.IsType<IndexFileException>(error, exactMatch: true);
        Xunit.Assert.StartsWith("Index file", rejected.Message, StringComparison.Ordinal);
        Xunit.Assert.True(
            allocated <= (4L * file.Length) + AllocationAllowance,
            $"rejecting a {file.Length}-byte input allocated {allocated} bytes ({rejected.Message})");
        return rejected;
    }

    /// <summary>Loads on a worker with a hang guard; returns the exception (or null) and the managed bytes the load allocated.</summary>
    public static (Exception? Error, long Allocated) Run(byte[] file, IndexLoadOptions? options = null, Func<byte[], Stream>? open = null)
    {
        var task = Task.Factory.StartNew(
            () =>
            {
                Stream stream = open is null ? new MemoryStream(file, writable: false) : open(file);
                long before = GC.GetAllocatedBytesForCurrentThread();
                try
                {
                    using IVectorIndex index = IndexFile.Load(stream, options);
                    return ((Exception?)null, GC.GetAllocatedBytesForCurrentThread() - before);
                }
                catch (Exception e)
                {
                    return (e, GC.GetAllocatedBytesForCurrentThread() - before);
                }
            },
            CancellationToken.None,
            TaskCreationOptions.LongRunning,
            TaskScheduler.Default);
        Xunit.Assert.True(task.Wait(HangLimit), $"loading a {file.Length}-byte input did not finish within {HangLimit.TotalSeconds} s");
        return task.Result;
    }
}

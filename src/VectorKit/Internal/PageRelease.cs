using System.Runtime.InteropServices;

namespace VectorKit.Internal;

/// <summary>
/// Gives a large native block's pages back to the system a few MiB at a time, before the block is freed.
/// </summary>
/// <remarks>
/// Freeing a large block unmaps it, and the kernel keeps the process's address-space lock while it releases every
/// page of it; a thread that maps memory meanwhile (a search growing its visited set, the runtime committing heap)
/// waits for all of it. Released in steps first, the pages go under short holds of that lock, and the unmap that
/// follows has nothing left to release. Linux only; elsewhere, and for small blocks, it does nothing.
/// </remarks>
internal static unsafe partial class PageRelease
{
    // Below this, freeing is quick enough as it is.
    private const long Threshold = 64L << 20;
    private const long Step = 8L << 20;
    private const int DontNeed = 4;

    /// <summary>Releases the whole pages of [<paramref name="start"/>, <paramref name="start"/> + <paramref name="bytes"/>), which the caller frees next and nobody reads again.</summary>
    public static void BeforeFree(void* start, long bytes)
    {
        if (bytes < Threshold || !OperatingSystem.IsLinux())
        {
            return;
        }

        long page = Environment.SystemPageSize;
        long first = ((long)start + page - 1) & ~(page - 1);
        long end = ((long)start + bytes) & ~(page - 1);
        for (long at = first; at < end; at += Step)
        {
            // Advice only: a refusal leaves the pages to the unmap, as without this step.
            _ = Advise((void*)at, (nuint)Math.Min(Step, end - at), DontNeed);
        }
    }

    [LibraryImport("libc", EntryPoint = "madvise")]
    private static partial int Advise(void* start, nuint length, int advice);
}

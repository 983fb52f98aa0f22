using System.Runtime.InteropServices;

namespace VectorKit.Internal;

/// <summary>
/// Asks Linux to back a large native block with 2 MiB pages where the system leaves that to the program (transparent
/// huge pages in "madvise" mode). Rows read in random order (graph walks, re-scoring) otherwise miss the address
/// translation cache on nearly every row once the block is far larger than its reach.
/// </summary>
internal static partial class HugePages
{
    // Below a few huge pages the hint gains nothing and costs a system call per resize.
    private const long MinimumBytes = 8L << 20;
    private const int AdviseHugePage = 14;
    private const nuint SmallPage = 4096;

    private static bool s_unavailable;

    /// <summary>Hints that <paramref name="bytes"/> bytes from <paramref name="start"/> should use huge pages; a hint only (failures are ignored).</summary>
    public static unsafe void Advise(void* start, nuint bytes)
    {
        if (!OperatingSystem.IsLinux() || (long)bytes < MinimumBytes || s_unavailable)
        {
            return;
        }

        // The call takes whole pages: the block's inner page-aligned part.
        nuint first = ((nuint)start + SmallPage - 1) & ~(SmallPage - 1);
        nuint end = ((nuint)start + bytes) & ~(SmallPage - 1);
        try
        {
            _ = Advise(first, end - first, AdviseHugePage);
        }
        catch (Exception e) when (e is DllNotFoundException or EntryPointNotFoundException)
        {
            s_unavailable = true;
        }
    }

    [LibraryImport("libc", EntryPoint = "madvise")]
    private static partial int Advise(nuint address, nuint length, int advice);
}

using System.Runtime.InteropServices;

namespace VectorKit.Internal;

/// <summary>
/// The processor time the calling thread has used, for diagnostics: a step whose wall time far exceeds it did not run
/// for most of it (pre-empted, or its virtual processor held back by the host). Linux only; -1 elsewhere.
/// </summary>
internal static unsafe partial class ThreadClock
{
    private const int ThreadCpuTime = 3;

    /// <summary>Nanoseconds of processor time used by the calling thread so far, or -1 where unknown.</summary>
    public static long CpuNanoseconds()
    {
        if (!OperatingSystem.IsLinux())
        {
            return -1;
        }

        TimeSpec now;
        return GetTime(ThreadCpuTime, &now) == 0 ? (now.Seconds * 1_000_000_000) + now.Nanoseconds : -1;
    }

    [LibraryImport("libc", EntryPoint = "clock_gettime")]
    private static partial int GetTime(int clock, TimeSpec* time);

    private struct TimeSpec
    {
        public long Seconds;
        public long Nanoseconds;
    }
}

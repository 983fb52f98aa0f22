using System.Runtime.InteropServices;

namespace VectorKit.Benchmarks.Ladder;

/// <summary>
/// The calling thread's CPU time (user + system) from clock_gettime(CLOCK_THREAD_CPUTIME_ID): on a shared machine a
/// single-thread loop's CPU time stays close to what it would take on an idle core, while its wall time includes every
/// wait for a core. NaN where the call is not available (not Linux).
/// </summary>
internal static partial class ThreadCpuClock
{
    private const int ThreadCpuTimeId = 3;

    public static double Seconds()
    {
        if (!OperatingSystem.IsLinux())
        {
            return double.NaN;
        }

        return ClockGetTime(ThreadCpuTimeId, out Timespec value) == 0 ? value.Seconds + (value.Nanoseconds * 1e-9) : double.NaN;
    }

    [LibraryImport("libc", EntryPoint = "clock_gettime")]
    private static partial int ClockGetTime(int clock, out Timespec value);

    [StructLayout(LayoutKind.Sequential)]
    private struct Timespec
    {
        public long Seconds;
        public long Nanoseconds;
    }
}

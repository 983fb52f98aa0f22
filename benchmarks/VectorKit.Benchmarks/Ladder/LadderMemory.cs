using System.Globalization;
using System.Runtime;

namespace VectorKit.Benchmarks.Ladder;

/// <summary>
/// Where a step's resident memory goes, sampled twice a second on a background thread: anonymous resident pages
/// (RssAnon: the GC heap plus native allocations), file-backed resident pages (RssFile: mapped files, including the
/// runtime's own images), the GC heap's size (<see cref="GC.GetTotalMemory(bool)"/>: live objects plus garbage not yet
/// collected) and its committed bytes; the peak of each per stage (reading the sample, training, adding, sweep).
/// Page cache filled by ordinary reads of the data file is not resident in the process and is not counted by VmHWM.
/// </summary>
internal sealed class LadderMemory : IDisposable
{
    private readonly Thread _thread;
    private readonly Dictionary<string, Peaks> _peaks = [];
    private readonly List<string> _order = [];
    private readonly Lock _gate = new();
    private volatile bool _stop;
    private string _stage = "start";

    public LadderMemory()
    {
        _thread = new Thread(Run) { IsBackground = true, Name = "ladder memory sampler" };
        _thread.Start();
    }

    public void Stage(string stage)
    {
        lock (_gate)
        {
            _stage = stage;
        }
    }

    /// <summary>The resident memory just after the build, and after a full compacting collection: the difference is garbage the GC had not returned.</summary>
    public string AfterBuild(long indexBytes)
    {
        (long anonBefore, long fileBefore) = Resident();
        long heapBefore = GC.GetTotalMemory(false);
        GCSettings.LargeObjectHeapCompactionMode = GCLargeObjectHeapCompactionMode.CompactOnce;
        GC.Collect(GC.MaxGeneration, GCCollectionMode.Aggressive, blocking: true, compacting: true);
        (long anonAfter, long fileAfter) = Resident();
        long heapAfter = GC.GetTotalMemory(false);
        string line = string.Create(CultureInfo.InvariantCulture,
            $"memory after build: index MemoryBytes {Mib(indexBytes)} MiB; GC heap {Mib(heapBefore)} MiB, RssAnon {Mib(anonBefore)} MiB, RssFile {Mib(fileBefore)} MiB; after an aggressive compacting collection: GC heap {Mib(heapAfter)} MiB, RssAnon {Mib(anonAfter)} MiB, RssFile {Mib(fileAfter)} MiB");
        Console.Error.WriteLine(line);
        return line;
    }

    public string Summary()
    {
        lock (_gate)
        {
            return "memory peaks by stage: " + string.Join("; ", _order.Select(s => string.Create(CultureInfo.InvariantCulture,
                $"{s}: RssAnon {Mib(_peaks[s].Anon)} MiB, RssFile {Mib(_peaks[s].File)} MiB, GC heap {Mib(_peaks[s].Heap)} MiB, GC committed {Mib(_peaks[s].Committed)} MiB")));
        }
    }

    public void Dispose()
    {
        _stop = true;
        _thread.Join();
    }

    private static long Mib(long bytes) => bytes / (1024 * 1024);

    private void Run()
    {
        while (!_stop)
        {
            (long anon, long file) = Resident();
            long heap = GC.GetTotalMemory(false);
            long committed = GC.GetGCMemoryInfo().TotalCommittedBytes;
            lock (_gate)
            {
                if (!_peaks.TryGetValue(_stage, out Peaks? peaks))
                {
                    peaks = new Peaks();
                    _peaks[_stage] = peaks;
                    _order.Add(_stage);
                }

                peaks.Anon = Math.Max(peaks.Anon, anon);
                peaks.File = Math.Max(peaks.File, file);
                peaks.Heap = Math.Max(peaks.Heap, heap);
                peaks.Committed = Math.Max(peaks.Committed, committed);
            }

            Thread.Sleep(500);
        }
    }

    /// <summary>RssAnon and RssFile of /proc/self/status, in bytes; zeros where that file does not exist.</summary>
    private static (long Anon, long File) Resident()
    {
        const string status = "/proc/self/status";
        if (!File.Exists(status))
        {
            return (0, 0);
        }

        long anon = 0, file = 0;
        foreach (string line in File.ReadLines(status))
        {
            if (line.StartsWith("RssAnon:", StringComparison.Ordinal))
            {
                anon = Kilobytes(line) * 1024;
            }
            else if (line.StartsWith("RssFile:", StringComparison.Ordinal))
            {
                file = Kilobytes(line) * 1024;
            }
        }

        return (anon, file);
    }

    private static long Kilobytes(string line) => long.Parse(line[(line.IndexOf(':') + 1)..].Trim().Split(' ')[0], CultureInfo.InvariantCulture);

    private sealed class Peaks
    {
        public long Anon { get; set; }

        public long File { get; set; }

        public long Heap { get; set; }

        public long Committed { get; set; }
    }
}

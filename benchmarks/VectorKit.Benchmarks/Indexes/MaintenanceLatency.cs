using System.Diagnostics;
using System.Diagnostics.Tracing;
using System.Globalization;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using VectorKit.Tests.TestData;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// Search latency while the index is maintained: one thread searches back to back (single queries, k = 10, default
/// options) and records every latency; a second thread writes steadily, one write (a remove or an add, alternating)
/// per 100 searches; the main thread runs one maintenance step at a time: nothing (writes only), the graph's global
/// reachability pass, <c>Compact</c>, a save to a temporary file, and a batch search of 2,000 queries. Each phase
/// reports p50 / p99 / p99.9 / max search latency and the max over the p99 of the same index measured with no writes
/// at the start of the same run. Each maintenance step is repeated until the phase has lasted the given seconds. The
/// batch phase also reports the slowest write against the slowest batch (a write that waited for a whole batch would
/// take about as long as the batch). A second table lists the runtime's suspensions per phase (from its own events:
/// length, and for a collection its generation, reason and type) and matches every search that slept for longer than
/// 5× the no-write p99 against them and against the writes of the phase, to tell a collection's pause from a lock wait.
/// Each phase also reports the longest exclusive step (write-lock hold) the index took during it, and the steps over
/// 0.5 ms with their stacks, their wait for readers and the writer's processor time, and the steps the phase's longest
/// wait in the lock overlapped. A lock wait counts against the goal for the time a step's flag (which keeps readers out)
/// was up during its search: the rest of a wait, the flag was down and the searcher was not running. Two reference phases, after the
/// no-write one, force a collection every 100 ms (alone, then beside two ordinary threads searching) to show the
/// runtime's own pauses apart from the index.
/// </summary>
/// <remarks>
/// With a nice value given (Linux; lowering it needs root), the searching and the writing thread run at that value while
/// the maintenance step and the pool threads it uses stay at the process's: a service keeps its request threads ahead
/// of background work the same way. On 2 cores a compaction's parallel rebuild, the writer and the searcher are more
/// runnable threads than cores; without it the scheduler's pre-emption sets the maxima, and a writer pre-empted by the
/// rebuild while it holds the write lock for a short step makes the searches behind it wait for a time slice.
/// The graph's amortised pass is turned off during the write phases and run on its own phase, so the pass is measured
/// once per run rather than when 1/8 of the index has changed.
/// </remarks>
public static class MaintenanceLatency
{
    private const int K = 10;
    private const int QueryCount = 1_000;
    private const int SearchesPerWrite = 100;
    private const int BatchQueries = 2_000;

    private sealed record Phase(string Kind, string Name, double Seconds, int Runs, LatencySummary Searches, int Writes, double SlowestWriteMs, double Extra, Collections Gc, Waits Waits, DateTime StartUtc, DateTime EndUtc, List<SleptSearch> Slept, List<SleptSearch> WriteTimes, double LongestHoldMs, double FlagUpWaitMs = 0);

    // The searching and writing threads' nice value (0: the process's own), or real-time scheduling for both.
    private static int s_foregroundNice;
    private static bool s_realTime;

    // Under real-time scheduling the searcher rests 1 ms after every this many ms of searching: a thread that never
    // sleeps would meet the kernel's real-time throttling (95 % of each second by default), a pause of its own.
    private static double RealTimeBusyMs = 4;

    // Searches that waited longer than this in the index's lock are kept with their times, to match against the steps.
    private const double LongLockWaitMs = 0.5;

    /// <summary>A search that waited in the index's lock: its start and end (Stopwatch ticks) and the wait.</summary>
    private readonly record struct LockWait(long StartTicks, long EndTicks, double WaitMs);

    /// <summary>A search during which the searching thread slept (or a write): when it started and how long it took.</summary>
    private readonly record struct SleptSearch(DateTime StartUtc, double Ms);

    /// <summary>
    /// Searches split by what the thread's context-switch counts say happened during them (Linux, per thread): a search
    /// with a voluntary switch slept (a lock wait, a collection's suspension, a page read); one with only involuntary
    /// switches was pre-empted by the scheduler for other runnable threads, which no index design can prevent.
    /// </summary>
    /// <remarks>Apart from that split: the searches that waited for a writer in the index's lock, their longest wait, and the
    /// longest search that did not wait there.</remarks>
    private readonly record struct Waits(int Slept, double SleptMaxMs, int Preempted, double PreemptedMaxMs, double NeitherMaxMs, int LockWaits = 0, double LockWaitMaxMs = 0, double NoLockWaitMaxMs = 0);

    /// <summary>
    /// The runtime's collections during a phase (every collection pauses the searcher too), and the bytes the searching
    /// thread allocated per search (0 means its pauses come from the other threads' allocations).
    /// </summary>
    private readonly record struct Collections(int Gen0, int Gen1, int Gen2, double PauseMs, double SearchBytes)
    {
        public static Collections Since(int gen0, int gen1, int gen2, TimeSpan pause, long searchBytes, int searches) => new(
            GC.CollectionCount(0) - gen0,
            GC.CollectionCount(1) - gen1,
            GC.CollectionCount(2) - gen2,
            (GC.GetTotalPauseDuration() - pause).TotalMilliseconds,
            searches == 0 ? 0 : (double)searchBytes / searches);
    }

    /// <summary>Runs the harness on <paramref name="count"/> × <paramref name="dimension"/> clustered rows for the kinds named (exact, graph, inverted-file).</summary>
    public static void Run(int count, int dimension, double baselineSeconds, IReadOnlyList<string> kinds, int foregroundNice = 0, bool realTime = false, double realTimeBusyMs = 4)
    {
        RealTimeBusyMs = realTimeBusyMs;
        int d = dimension;
        int clusters = Math.Max(1, count / 100);
        s_foregroundNice = foregroundNice;
        s_realTime = realTime;
        string priority = realTime
            ? $"both real-time (first in, first out), the searcher resting 1 ms after every {RealTimeBusyMs} ms of searching"
            : $"both at nice {(foregroundNice == 0 ? "as the process" : foregroundNice.ToString(CultureInfo.InvariantCulture))}";
        Console.WriteLine($"clustered synthetic: {count:N0} × {d}, {clusters:N0} clusters, spread 0.2, squared L2; {QueryCount} queries, k = {K}; {Environment.ProcessorCount} cores; 1 searching thread, 1 writing thread (1 write per {SearchesPerWrite} searches), {priority}");
        float[] all = ClusteredData.Generate(count + QueryCount, d, clusters, 0.2f, seed: 101);
        float[] data = all.AsSpan(0, count * d).ToArray();
        float[] queries = all.AsSpan(count * d, QueryCount * d).ToArray();
        all = [];
        var phases = new List<Phase>();
        using var suspensions = new RuntimeSuspensions();
        MachineFloor(baselineSeconds);
        foreach (string kind in kinds)
        {
            RunKind(kind, data, queries, count, d, baselineSeconds, phases);
        }

        // The runtime's events arrive with a delay; the last phase's need a moment.
        Thread.Sleep(TimeSpan.FromSeconds(2));

        Console.WriteLine();
        Console.WriteLine("| index | phase | runs | phase s | searches | p50 ms | p99 ms | p99.9 ms | max ms | max / no-write p99 | max / no-write max | writes | slowest write ms | longest exclusive step ms | collections (gen 0/1/2) | GC pauses, total ms | bytes / search | slept: searches, max ms | pre-empted only: searches, max ms | neither: max ms | waited in the index's lock: searches, longest wait ms | max ms of searches that did not |");
        Console.WriteLine("|---|---|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|---:|");
        foreach (Phase p in phases)
        {
            LatencySummary baseline = phases.First(b => b.Kind == p.Kind).Searches;
            Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
                $"| {p.Kind} | {p.Name} | {p.Runs} | {p.Seconds:F1} | {p.Searches.Count:N0} | {p.Searches.P50:F2} | {p.Searches.P99:F2} | {p.Searches.P999:F2} | {p.Searches.Max:F2} | {p.Searches.Max / baseline.P99:F1} | {p.Searches.Max / baseline.Max:F2} | {p.Writes:N0} | {(p.Writes > 0 ? p.SlowestWriteMs.ToString("F1", CultureInfo.InvariantCulture) : "–")} | {p.LongestHoldMs:F2} | {p.Gc.Gen0}/{p.Gc.Gen1}/{p.Gc.Gen2} | {p.Gc.PauseMs:F0} | {p.Gc.SearchBytes:F0} | {p.Waits.Slept:N0}, {p.Waits.SleptMaxMs:F2} | {p.Waits.Preempted:N0}, {p.Waits.PreemptedMaxMs:F2} | {p.Waits.NeitherMaxMs:F2} | {p.Waits.LockWaits:N0}, {p.Waits.LockWaitMaxMs:F2} | {p.Waits.NoLockWaitMaxMs:F2} |"));
        }

        Console.WriteLine();
        Console.WriteLine("Runtime suspensions (every thread stopped: a collection's, or another reason) and the searches that slept for longer than 5× the no-write p99:");
        Console.WriteLine();
        Console.WriteLine("| index | phase | suspensions | longest suspension ms | of it: generation, reason, type | slept searches > 5× no-write p99 | of them overlapping a suspension | their longest ms | the rest overlapping a write | their longest ms | the rest's longest ms |");
        Console.WriteLine("|---|---|---:|---:|---|---:|---:|---:|---:|---:|---:|");
        List<RuntimeSuspensions.Suspension> recorded = suspensions.Snapshot();
        foreach (Phase p in phases)
        {
            double bound = 5 * phases.First(b => b.Kind == p.Kind).Searches.P99;
            List<RuntimeSuspensions.Suspension> during = recorded.Where(x => x.StartUtc < p.EndUtc && x.StartUtc + TimeSpan.FromMilliseconds(x.Ms) > p.StartUtc).ToList();
            RuntimeSuspensions.Suspension? longest = during.Count == 0 ? null : during.MaxBy(x => x.Ms);
            List<SleptSearch> slow = p.Slept.Where(x => x.Ms > bound).ToList();
            List<SleptSearch> overlapping = slow.Where(x => during.Any(y => y.StartUtc < x.StartUtc + TimeSpan.FromMilliseconds(x.Ms) && y.StartUtc + TimeSpan.FromMilliseconds(y.Ms) > x.StartUtc)).ToList();
            List<SleptSearch> rest = slow.Except(overlapping).ToList();
            List<SleptSearch> writing = rest.Where(x => p.WriteTimes.Any(w => w.StartUtc < x.StartUtc + TimeSpan.FromMilliseconds(x.Ms) && w.StartUtc + TimeSpan.FromMilliseconds(w.Ms) > x.StartUtc)).ToList();
            double others = rest.Except(writing).Select(x => x.Ms).DefaultIfEmpty(0).Max();
            Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
                $"| {p.Kind} | {p.Name} | {during.Count} | {(longest is { } l ? l.Ms.ToString("F1", CultureInfo.InvariantCulture) : "–")} | {(longest is { } m ? m.Describe() : "–")} | {slow.Count} | {overlapping.Count} | {overlapping.Select(x => x.Ms).DefaultIfEmpty(0).Max():F1} | {writing.Count} | {writing.Select(x => x.Ms).DefaultIfEmpty(0).Max():F1} | {others:F1} |"));
        }

        // The goal, split by cause: what the index made a search wait (its lock; the runtime's suspensions, which our
        // allocations trigger) against what the machine did to a search that waited for neither. A suspension counts by
        // the searches it stopped (those that slept while it lasted), not by its own length: the runtime's events time
        // it from the request to stop every thread, which waits for ordinary threads the real-time ones keep off the
        // cores, while a searcher resting between searches is not stopped at all.
        Console.WriteLine();
        Console.WriteLine("Against the goal (max within 5× the no-write p99), by cause:");
        Console.WriteLine();
        Console.WriteLine("| index | phase | no-write p99 ms | 5× that | max search ms | longest wait in the index's lock ms | of a wait, longest part with a step's flag up ms | longest runtime suspension ms | longest search that slept during one ms | index-caused wait within 5×? | max of searches that did not wait in the lock ms |");
        Console.WriteLine("|---|---|---:|---:|---:|---:|---:|---:|---:|---|---:|");
        foreach (Phase p in phases)
        {
            double p99 = phases.First(b => b.Kind == p.Kind).Searches.P99;
            List<RuntimeSuspensions.Suspension> during = recorded.Where(x => x.StartUtc < p.EndUtc && x.StartUtc + TimeSpan.FromMilliseconds(x.Ms) > p.StartUtc).ToList();
            double suspension = during.Select(x => x.Ms).DefaultIfEmpty(0).Max();
            double stopped = p.Slept.Where(x => during.Any(y => y.StartUtc < x.StartUtc + TimeSpan.FromMilliseconds(x.Ms) && y.StartUtc + TimeSpan.FromMilliseconds(y.Ms) > x.StartUtc)).Select(x => x.Ms).DefaultIfEmpty(0).Max();
            bool within = Math.Max(p.FlagUpWaitMs, stopped) <= 5 * p99;
            Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
                $"| {p.Kind} | {p.Name} | {p99:F2} | {5 * p99:F2} | {p.Searches.Max:F2} | {p.Waits.LockWaitMaxMs:F2} | {p.FlagUpWaitMs:F2} | {suspension:F1} | {stopped:F2} | {(within ? "yes" : "no")} | {p.Waits.NoLockWaitMaxMs:F2} |"));
        }

        Console.WriteLine();
        foreach (Phase p in phases.Where(p => p.Name.StartsWith("batch", StringComparison.Ordinal)))
        {
            Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{p.Kind}: the slowest batch search of {BatchQueries:N0} queries took {p.Extra:F0} ms; the slowest write during the batches {p.SlowestWriteMs:F1} ms"));
        }
    }

    private static void RunKind(string kind, float[] data, float[] queries, int count, int d, double baselineSeconds, List<Phase> phases)
    {
        long[] ids = Enumerable.Range(0, count).Select(i => (long)i).ToArray();
        var build = Stopwatch.StartNew();
        using VectorIndex index = kind switch
        {
            "exact" => new ExactIndex(d, DistanceMetric.SquaredEuclidean),
            "graph" => new GraphIndex(d, DistanceMetric.SquaredEuclidean),
            "inverted-file" => new InvertedFileIndex(d, DistanceMetric.SquaredEuclidean),
            _ => throw new ArgumentException($"unknown kind '{kind}'; expected exact, graph or inverted-file", nameof(kind)),
        };
        index.Train(data.AsSpan(0, Math.Min(count, 100_000) * d));
        index.AddRange(ids, data);
        Console.WriteLine($"{kind}: built in {build.Elapsed.TotalSeconds:F1} s");
        index.TraceWriteHoldsLongerThan(TimeSpan.FromMilliseconds(0.5));
        var graph = index as GraphIndex;

        // Warm-up, then the reference: searches with no writes. The warm-up includes a removal and an add (of the same
        // item back), so that the first write of a phase does not compile the write paths' code inside the write lock
        // (a one-off of 1-3 ms in every earlier run).
        Measure(index, queries, d, TimeSpan.FromSeconds(1), writes: null, static () => { });
        index.Remove(count - 1);
        index.Add(count - 1, data.AsSpan((count - 1) * d, d));
        phases.Add(Measure(kind, "no writes", index, queries, d, baselineSeconds, null, () => Thread.Sleep(TimeSpan.FromSeconds(baselineSeconds))));

        // References for the runtime's own pauses, whatever causes them: a collection every 100 ms made by an ordinary
        // thread, first with nothing else running, then beside two ordinary threads busy searching (as a rebuild's
        // linking threads are busy).
        phases.Add(Measure(kind, "collections (reference)", index, queries, d, baselineSeconds, null, () => CollectEvery100Ms(baselineSeconds, index, queries, d, busyThreads: 0)));
        phases.Add(Measure(kind, "collections beside 2 busy threads (reference)", index, queries, d, baselineSeconds, null, () => CollectEvery100Ms(baselineSeconds, index, queries, d, busyThreads: 2)));

        var writer = new SteadyWriter(index, data, count, d);
        if (graph is not null)
        {
            graph.FullPassDivisor = 0;
        }

        phases.Add(Measure(kind, "removes + adds", index, queries, d, baselineSeconds, writer, () => Thread.Sleep(TimeSpan.FromSeconds(baselineSeconds))));
        if (graph is not null)
        {
            phases.Add(Measure(kind, "global pass", index, queries, d, baselineSeconds, writer, () => graph.RunFullPass()));
        }

        phases.Add(Measure(kind, "compact", index, queries, d, baselineSeconds, writer, () => index.Compact()));
        string path = Path.Combine(Path.GetTempPath(), $"maintenance-latency-{Environment.ProcessId}.vki");
        try
        {
            phases.Add(Measure(kind, "save (file)", index, queries, d, baselineSeconds, writer, () => IndexFile.Save(index, path)));
        }
        finally
        {
            File.Delete(path);
        }

        double batchMs = 0;
        float[] batch = new float[BatchQueries * d];
        for (int i = 0; i < BatchQueries; i++)
        {
            queries.AsSpan((i % QueryCount) * d, d).CopyTo(batch.AsSpan(i * d, d));
        }

        Phase batchPhase = Measure(kind, "batch search", index, queries, d, baselineSeconds, writer, () =>
        {
            var watch = Stopwatch.StartNew();
            index.SearchBatch(batch, K);
            batchMs = Math.Max(batchMs, watch.Elapsed.TotalMilliseconds);
        });
        phases.Add(batchPhase with { Extra = batchMs });
    }

    private static void CollectEvery100Ms(double seconds, VectorIndex index, float[] queries, int d, int busyThreads)
    {
        bool stop = false;
        var busy = Enumerable.Range(0, busyThreads).Select(t => new Thread(() =>
        {
            var hits = new SearchHit[K];
            for (int q = t; !Volatile.Read(ref stop); q = (q + 1) % QueryCount)
            {
                index.Search(queries.AsSpan(q * d, d), hits);
            }
        }) { IsBackground = true }).ToList();
        busy.ForEach(t => t.Start());
        var watch = Stopwatch.StartNew();
        while (watch.Elapsed.TotalSeconds < seconds)
        {
            Thread.Sleep(100);
            GC.Collect(0, GCCollectionMode.Forced, blocking: true);
        }

        Volatile.Write(ref stop, true);
        busy.ForEach(t => t.Join());
    }

    /// <summary>
    /// Every suspension of the runtime (all managed threads stopped) from its own events: start, length, and for a
    /// collection its generation, reason and type, so a slow search can be matched with a pause or cleared of one.
    /// </summary>
    private sealed class RuntimeSuspensions : EventListener
    {
        // Event ids of the runtime's provider (GC keyword 0x1): GCStart_V2, GCRestartEEEnd, GCSuspendEEBegin.
        private const int GcStart = 1;
        private const int RestartEnd = 3;
        private const int SuspendBegin = 9;
        private static readonly string[] Reasons = ["small allocation", "induced", "low memory", "empty", "large allocation", "out of small-object space", "out of large-object space", "induced, not forced", "internal", "induced, low memory", "induced, compacting", "low memory (host)", "full blocking (provisioned)", "low memory (host), blocking"];
        private static readonly string[] Types = ["blocking", "background", "foreground during background"];
        private readonly object _sync = new();
        private readonly List<Suspension> _done = [];
        private DateTime _start;
        private int _generation = -1, _reason, _type;

        public readonly record struct Suspension(DateTime StartUtc, double Ms, int Generation, int Reason, int Type)
        {
            public string Describe() => Generation < 0
                ? "not a collection"
                : $"gen {Generation}, {(Reason < Reasons.Length ? Reasons[Reason] : Reason.ToString(CultureInfo.InvariantCulture))}, {(Type < Types.Length ? Types[Type] : Type.ToString(CultureInfo.InvariantCulture))}";
        }

        public List<Suspension> Snapshot()
        {
            lock (_sync)
            {
                return [.. _done];
            }
        }

        protected override void OnEventSourceCreated(EventSource eventSource)
        {
            if (eventSource.Name == "Microsoft-Windows-DotNETRuntime")
            {
                EnableEvents(eventSource, EventLevel.Informational, (EventKeywords)0x1);
            }
        }

        protected override void OnEventWritten(EventWrittenEventArgs e)
        {
            lock (_sync)
            {
                switch (e.EventId)
                {
                    case SuspendBegin:
                        _start = e.TimeStamp.ToUniversalTime();
                        _generation = -1;
                        break;
                    case GcStart when e.Payload is { Count: >= 4 }:
                        _generation = Convert.ToInt32(e.Payload[1], CultureInfo.InvariantCulture);
                        _reason = Convert.ToInt32(e.Payload[2], CultureInfo.InvariantCulture);
                        _type = Convert.ToInt32(e.Payload[3], CultureInfo.InvariantCulture);
                        break;
                    case RestartEnd when _start != default:
                        DateTime end = e.TimeStamp.ToUniversalTime();
                        _done.Add(new Suspension(_start, (end - _start).TotalMilliseconds, _generation, _reason, _type));
                        _start = default;
                        break;
                }
            }
        }
    }

    // The longest part of a lock wait during which a write step kept readers out: each wait kept (over LongLockWaitMs)
    // is capped by the time the flag of any step was up during its search, since the rest of the wait the flag was down
    // and the search was not running (not scheduled); shorter waits count in full. The raw wait when the timeline or
    // the list of waits ran out of room.
    private static double FlagUpWait(VectorIndex index, Waits waits, List<LockWait> lockWaits, long startTicks, long holdsBefore)
    {
        if (lockWaits.Count == s_lockWaits.Capacity || index.WriteHoldsRecorded - holdsBefore >= 1 << 20)
        {
            Console.WriteLine("  (the lock waits or the step timeline ran out of room: the flag-up wait is the raw wait)");
            return waits.LockWaitMaxMs;
        }

        var holds = index.WriteHoldsBetween(startTicks, long.MaxValue);
        long[] ends = holds.Select(h => h.LeftTicks).ToArray();
        double longest = Math.Min(waits.LockWaitMaxMs, LongLockWaitMs);
        foreach (LockWait wait in lockWaits)
        {
            int at = Array.BinarySearch(ends, wait.StartTicks);
            long up = 0;
            for (int i = at < 0 ? ~at : at; i < holds.Count && holds[i].RaisedTicks < wait.EndTicks; i++)
            {
                up += Math.Min(holds[i].LeftTicks, wait.EndTicks) - Math.Max(holds[i].RaisedTicks, wait.StartTicks);
            }

            longest = Math.Max(longest, Math.Min(wait.WaitMs, up * 1000.0 / Stopwatch.Frequency));
        }

        return longest;
    }

    // One phase: the searcher runs while `maintenance` runs, again and again until `seconds` have passed (at least
    // once), the writer beside it when given.
    private static Phase Measure(string kind, string name, VectorIndex index, float[] queries, int d, double seconds, SteadyWriter? writer, Action maintenance)
    {
        var watch = Stopwatch.StartNew();
        long startTicks = Stopwatch.GetTimestamp();
        long holdsBefore = index.WriteHoldsRecorded;
        VectorKit.Internal.IndexLock.TakeLongHolds();
        long allocatedBefore = GC.GetTotalAllocatedBytes();
        DateTime startUtc = DateTime.UtcNow;
        int runs = 0;
        index.ResetLongestWriteHold();
        (LatencySummary summary, int writes, double slowest, Collections gc, Waits waits, List<SleptSearch> slept, List<LockWait> lockWaits) = Measure(index, queries, d, null, writer, () =>
        {
            do
            {
                maintenance();
                runs++;
            }
            while (watch.Elapsed.TotalSeconds < seconds);
        });
        var holds = VectorKit.Internal.IndexLock.TakeLongHolds();
        if (lockWaits.Count > 0)
        {
            // The exclusive steps over 0.5 ms that overlapped the search with the longest wait in the lock, to name its cause.
            LockWait longest = lockWaits.MaxBy(w => w.WaitMs);
            var overlapping = holds.Where(h => h.EndTicks > longest.StartTicks && h.EndTicks - (long)(h.Ms * Stopwatch.Frequency / 1000) < longest.EndTicks).ToList();
            Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"  {kind}, {name}: the longest wait in the lock, {longest.WaitMs:F2} ms (search {(longest.EndTicks - longest.StartTicks) * 1000.0 / Stopwatch.Frequency:F2} ms), overlapped {overlapping.Count} exclusive step(s) over 0.5 ms{(overlapping.Count == 0 ? " (so its wait was steps under 0.5 ms, or the wake-up after one)" : ":")}"));
            foreach (var hold in overlapping)
            {
                string frame = hold.Stack.Split(Environment.NewLine).Select(l => l.Trim()).FirstOrDefault(l => !l.Contains("IndexLock", StringComparison.Ordinal)) ?? "";
                Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"    {hold.Ms:F2} ms (waiting for readers {hold.DrainMs:F2} ms, on a processor {hold.CpuMs:F2} ms) {frame}; {hold.Drain}"));
            }

            // Every step of any length during that search: one long step, many short ones back to back (their flag up
            // for most of the wait), or the search not running while the flag was down.
            var steps = index.WriteHoldsBetween(longest.StartTicks, longest.EndTicks);
            double Ms(long ticks) => ticks * 1000.0 / Stopwatch.Frequency;
            long flagUp = steps.Sum(h => Math.Min(h.LeftTicks, longest.EndTicks) - Math.Max(h.RaisedTicks, longest.StartTicks));
            long longestGap = 0, previous = longest.StartTicks;
            foreach (var (raised, left) in steps.OrderBy(h => h.RaisedTicks))
            {
                longestGap = Math.Max(longestGap, raised - previous);
                previous = Math.Max(previous, left);
            }

            longestGap = Math.Max(longestGap, longest.EndTicks - previous);
            Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"    during that search: {steps.Count} exclusive step(s) of any length, the flag up {Ms(flagUp):F2} ms of its {Ms(longest.EndTicks - longest.StartTicks):F2} ms, the longest time with the flag down {Ms(longestGap):F2} ms"));
            foreach (var (raised, left) in steps.OrderBy(h => h.RaisedTicks).Take(12))
            {
                Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"      step at +{Ms(raised - longest.StartTicks):F2} ms for {Ms(left - raised):F3} ms"));
            }
        }

        foreach (var group in holds.GroupBy(h => h.Stack).OrderByDescending(g => g.Max(h => h.Ms)).Take(4))
        {
            Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"  {kind}, {name}: {group.Count()} exclusive steps over 0.5 ms, longest {group.Max(h => h.Ms):F2} ms (of it waiting for readers to leave {group.MaxBy(h => h.Ms).DrainMs:F2} ms; the writer on a processor for {group.MaxBy(h => h.Ms).CpuMs:F2} ms of it; {group.MaxBy(h => h.Ms).Drain}), ending at:"));
            Console.WriteLine(string.Join(Environment.NewLine, group.Key.Split(Environment.NewLine).Take(8).Select(l => "    " + l.Trim())));
        }

        var phase = new Phase(kind, name, watch.Elapsed.TotalSeconds, runs, summary, writes, slowest, 0, gc, waits, startUtc, DateTime.UtcNow, slept, writer is null ? [] : [.. writer.Times], index.LongestWriteHold.TotalMilliseconds,
            FlagUpWait(index, waits, lockWaits, startTicks, holdsBefore));
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{kind}, {name}: {phase.Seconds:F1} s, {summary.Count:N0} searches, p99 {summary.P99:F2} ms, max {summary.Max:F2} ms, {writes} writes (slowest {slowest:F1} ms), collections {gc.Gen0}/{gc.Gen1}/{gc.Gen2}, GC pauses {gc.PauseMs:F0} ms in all; longest exclusive step {phase.LongestHoldMs:F2} ms; slept {waits.Slept} (max {waits.SleptMaxMs:F2} ms), pre-empted only {waits.Preempted} (max {waits.PreemptedMaxMs:F2} ms), neither max {waits.NeitherMaxMs:F2} ms; waited in the lock {waits.LockWaits} (longest wait {waits.LockWaitMaxMs:F2} ms), max of the others {waits.NoLockWaitMaxMs:F2} ms; {(GC.GetTotalAllocatedBytes() - allocatedBefore) / 1048576.0:F0} MiB allocated in the process"));
        return phase;
    }

    private static (LatencySummary Summary, int Writes, double SlowestWriteMs, Collections Gc, Waits Waits, List<SleptSearch> Slept, List<LockWait> LockWaits) Measure(VectorIndex index, float[] queries, int d, TimeSpan? duration, SteadyWriter? writes, Action maintenance)
    {
        // Room for every sample up front, touched before the phase: growing the list mid-phase would allocate (and
        // collect) beside the searches, and a first touch of each page would fault in the searching thread, where a
        // machine short of free pages reclaims some first.
        // The same lists every phase: 33 MiB of fresh large arrays per phase had started gen-2 collections (and their
        // pauses) during later phases, which the harness would then have counted against the index.
        var latencies = s_latencies;
        var slept = s_slept;
        var lockWaits = s_lockWaits;
        latencies.Clear();
        slept.Clear();
        lockWaits.Clear();
        int searches = 0;
        long searchBytes = 0;
        var waits = default(Waits);
        bool stop = false;
        var searcher = new Thread(() =>
        {
            var hits = new SearchHit[K];
            int q = 0;
            SetForeground();

            // One untimed search first: a thread's first search allocates its scratch (the graph's visited set is sized
            // to the index), which is not a per-search cost.
            index.Search(queries.AsSpan(0, d), hits);
            VectorKit.Internal.IndexLock.TakeReadWait();
            long allocated = GC.GetAllocatedBytesForCurrentThread();
            long busySince = Stopwatch.GetTimestamp();
            while (!Volatile.Read(ref stop))
            {
                if (s_realTime && Stopwatch.GetElapsedTime(busySince).TotalMilliseconds >= RealTimeBusyMs)
                {
                    Thread.Sleep(1);
                    busySince = Stopwatch.GetTimestamp();
                }

                ThreadSwitches before = ThreadSwitches.Read();
                DateTime startUtc = DateTime.UtcNow;
                long start = Stopwatch.GetTimestamp();
                index.Search(queries.AsSpan(q * d, d), hits);
                double ms = Stopwatch.GetElapsedTime(start).TotalMilliseconds;
                ThreadSwitches after = ThreadSwitches.Read();
                double lockWait = VectorKit.Internal.IndexLock.TakeReadWait().TotalMilliseconds;
                if (lockWait > LongLockWaitMs && lockWaits.Count < lockWaits.Capacity)
                {
                    lockWaits.Add(new LockWait(start, start + (long)(ms * Stopwatch.Frequency / 1000), lockWait));
                }

                latencies.Add(ms);
                waits = lockWait > 0
                    ? waits with { LockWaits = waits.LockWaits + 1, LockWaitMaxMs = Math.Max(waits.LockWaitMaxMs, lockWait) }
                    : waits with { NoLockWaitMaxMs = Math.Max(waits.NoLockWaitMaxMs, ms) };
                if (after.Voluntary > before.Voluntary)
                {
                    waits = waits with { Slept = waits.Slept + 1, SleptMaxMs = Math.Max(waits.SleptMaxMs, ms) };
                    if (slept.Count < slept.Capacity)
                    {
                        slept.Add(new SleptSearch(startUtc, ms));
                    }
                }
                else if (after.Involuntary > before.Involuntary)
                {
                    waits = waits with { Preempted = waits.Preempted + 1, PreemptedMaxMs = Math.Max(waits.PreemptedMaxMs, ms) };
                }
                else
                {
                    waits = waits with { NeitherMaxMs = Math.Max(waits.NeitherMaxMs, ms) };
                }

                Interlocked.Increment(ref searches);
                q = (q + 1) % QueryCount;
            }

            // Less the latency list's own growth: it is sized up front for every sample a phase is expected to take.
            searchBytes = GC.GetAllocatedBytesForCurrentThread() - allocated;
        });
        Thread? writer = writes is null ? null : new Thread(() =>
        {
            SetForeground();
            writes.Run(() => Volatile.Read(ref searches), () => Volatile.Read(ref stop));
        });
        writes?.Reset();
        (int gen0, int gen1, int gen2, TimeSpan pause) = (GC.CollectionCount(0), GC.CollectionCount(1), GC.CollectionCount(2), GC.GetTotalPauseDuration());
        searcher.Start();
        writer?.Start();
        if (duration is TimeSpan span)
        {
            Thread.Sleep(span);
        }

        maintenance();
        Volatile.Write(ref stop, true);
        searcher.Join();
        writer?.Join();
        Collections gc = Collections.Since(gen0, gen1, gen2, pause, searchBytes, searches);
        return (LatencySummary.Of(latencies), writes?.Count ?? 0, writes?.SlowestMs ?? 0, gc, waits, [.. slept], [.. lockWaits]);
    }

    // The machine's own floor: a thread scheduled as the searcher is (and resting as it does) reads the clock in a
    // loop touching nothing else; every gap between two reads is time the thread lost to something outside the
    // process (the hypervisor, interrupts, the kernel), which no index can avoid.
    private static void MachineFloor(double seconds)
    {
        double longest = 0;
        int over = 0;
        var thread = new Thread(() =>
        {
            SetForeground();
            long end = Stopwatch.GetTimestamp() + (long)(seconds * Stopwatch.Frequency);
            long busySince = Stopwatch.GetTimestamp();
            long previous = busySince;
            while (previous < end)
            {
                long now = Stopwatch.GetTimestamp();
                double gap = (now - previous) * 1000.0 / Stopwatch.Frequency;
                if (gap > 0.1)
                {
                    over++;
                    longest = Math.Max(longest, gap);
                }

                previous = now;
                if (s_realTime && (now - busySince) * 1000.0 / Stopwatch.Frequency >= RealTimeBusyMs)
                {
                    Thread.Sleep(1);
                    busySince = previous = Stopwatch.GetTimestamp();
                }
            }
        });
        thread.Start();
        thread.Join();
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"machine floor: a thread reading the clock for {seconds:F0} s, scheduled as the searcher, lost more than 0.1 ms {over} times, the longest {longest:F2} ms"));
    }

    // An empty list whose storage for `capacity` items has been written once.
    private static readonly List<double> s_latencies = Touched<double>(1 << 22);
    private static readonly List<SleptSearch> s_slept = Touched<SleptSearch>(1 << 16);
    private static readonly List<LockWait> s_lockWaits = Touched<LockWait>(1 << 14);

    private static List<T> Touched<T>(int capacity)
    {
        var list = new List<T>(capacity);
        System.Runtime.InteropServices.CollectionsMarshal.SetCount(list, capacity);
        System.Runtime.InteropServices.CollectionsMarshal.AsSpan(list).Clear();
        list.Clear();
        return list;
    }

    /// <summary>One write per <see cref="SearchesPerWrite"/> searches: removes a random live item, then adds a new one, in turn.</summary>
    private sealed class SteadyWriter(VectorIndex index, float[] data, int count, int d)
    {
        private readonly List<long> _live = Enumerable.Range(0, count).Select(i => (long)i).ToList();
        private readonly Random _random = new(7);
        private long _nextId = count;
        private int _done;

        public int Count { get; private set; }

        public double SlowestMs { get; private set; }

        /// <summary>When each write of the phase started and how long it took.</summary>
        public List<SleptSearch> Times { get; } = new(1 << 16);

        public void Reset()
        {
            Count = 0;
            SlowestMs = 0;
            Times.Clear();
        }

        public void Run(Func<int> searches, Func<bool> stop)
        {
            int start = searches();
            while (!stop())
            {
                if (searches() - start < (Count + 1) * SearchesPerWrite)
                {
                    Thread.Sleep(1);
                    continue;
                }

                DateTime beginUtc = DateTime.UtcNow;
                long begin = Stopwatch.GetTimestamp();
                if ((_done++ & 1) == 0)
                {
                    int at = _random.Next(_live.Count);
                    long id = _live[at];
                    _live[at] = _live[^1];
                    _live.RemoveAt(_live.Count - 1);
                    index.Remove(id);
                }
                else
                {
                    long id = _nextId++;
                    index.Add(id, data.AsSpan((int)(id % count) * d, d));
                    _live.Add(id);
                }

                double ms = Stopwatch.GetElapsedTime(begin).TotalMilliseconds;
                SlowestMs = Math.Max(SlowestMs, ms);
                if (Times.Count < Times.Capacity)
                {
                    Times.Add(new SleptSearch(beginUtc, ms));
                }

                Count++;
            }
        }
    }

    /// <summary>Latency percentiles of one phase, in milliseconds (nearest rank).</summary>
    private sealed record LatencySummary(int Count, double P50, double P99, double P999, double Max)
    {
        public static LatencySummary Of(List<double> values)
        {
            if (values.Count == 0)
            {
                return new LatencySummary(0, double.NaN, double.NaN, double.NaN, double.NaN);
            }

            values.Sort();
            double At(double p) => values[Math.Min(values.Count - 1, (int)Math.Ceiling(p * values.Count) - 1)];
            return new LatencySummary(values.Count, At(0.50), At(0.99), At(0.999), values[^1]);
        }
    }

    // Puts the calling thread (searcher or writer) ahead of background work, as the run asked. Under real-time
    // scheduling the writer runs real-time too: a writer pre-empted inside an exclusive step keeps every search waiting
    // for a time slice (at nice -10 the longest waits in the lock were 9-10 ms against under 1 ms).
    private static void SetForeground()
    {
        if (s_realTime)
        {
            SetThreadRealTime();
        }
        else
        {
            SetThreadNice(s_foregroundNice);
        }
    }

    // Sets the calling thread's scheduling to first-in-first-out real-time (Linux; needs root); says so when refused.
    private static void SetThreadRealTime()
    {
        int priority = 10;
        if (!OperatingSystem.IsLinux() || SetScheduler(GetThreadId(), 1, ref priority) != 0)
        {
            Console.WriteLine($"could not give a foreground thread real-time scheduling (error {System.Runtime.InteropServices.Marshal.GetLastPInvokeError()}); it runs at the process's priority");
        }
    }

    [System.Runtime.InteropServices.DllImport("libc", EntryPoint = "sched_setscheduler", SetLastError = true)]
    private static extern int SetScheduler(int pid, int policy, ref int priority);

    // Sets the calling thread's nice value (Linux setpriority on its thread id); says so when refused.
    private static void SetThreadNice(int nice)
    {
        if (nice == 0 || !OperatingSystem.IsLinux())
        {
            return;
        }

        if (SetPriority(0, GetThreadId(), nice) != 0)
        {
            Console.WriteLine($"could not set a foreground thread's nice value to {nice} (error {System.Runtime.InteropServices.Marshal.GetLastPInvokeError()}); it runs at the process's");
        }
    }

    [System.Runtime.InteropServices.DllImport("libc", EntryPoint = "setpriority", SetLastError = true)]
    private static extern int SetPriority(int which, int who, int priority);

    [System.Runtime.InteropServices.DllImport("libc", EntryPoint = "gettid")]
    private static extern int GetThreadId();

    /// <summary>The calling thread's context switches so far (Linux <c>getrusage(RUSAGE_THREAD)</c>; zeros elsewhere).</summary>
    private readonly record struct ThreadSwitches(long Voluntary, long Involuntary)
    {
        private const int RusageThread = 1;

        public static ThreadSwitches Read()
        {
            if (!OperatingSystem.IsLinux() || GetResourceUsage(RusageThread, out ResourceUsage usage) != 0)
            {
                return default;
            }

            return new ThreadSwitches(usage.VoluntarySwitches, usage.InvoluntarySwitches);
        }

        [System.Runtime.InteropServices.DllImport("libc", EntryPoint = "getrusage")]
        private static extern int GetResourceUsage(int who, out ResourceUsage usage);

        // struct rusage on 64-bit Linux: two timevals, then fourteen longs, the last two the switch counts.
        [System.Runtime.InteropServices.StructLayout(System.Runtime.InteropServices.LayoutKind.Sequential)]
        private struct ResourceUsage
        {
            public long UserSeconds, UserMicroseconds, SystemSeconds, SystemMicroseconds;
            public long MaxResident, SharedText, UnsharedData, UnsharedStack, MinorFaults, MajorFaults, Swaps, BlockInputs, BlockOutputs, MessagesSent, MessagesReceived, Signals;
            public long VoluntarySwitches, InvoluntarySwitches;
        }
    }
}

using System.Diagnostics;
using System.Globalization;
using SharpFuzz;
using VectorKit.Fuzz;

// The afl harness. One target per process, chosen by the first argument:
//   VectorKit.Fuzz <target>                       afl mode (under afl-fuzz; outside it, runs stdin once)
//   VectorKit.Fuzz <target> --replay <path>...    runs files (or every file of folders) once each, with the
//                                                 managed bytes allocated and the peak resident growth of each;
//                                                 exit 1 when an input escapes the documented exceptions or hangs
//   VectorKit.Fuzz seeds <folder>                 writes seed inputs for every target into <folder>/<target>/
//   VectorKit.Fuzz list                           the target names
// An input that allocates more than FuzzTargets.AllocationCap in managed memory, or grows the resident set by more,
// is a finding (a crash under afl), as an unexpected exception is.
if (args.Length == 0 || args[0] is "-h" or "--help")
{
    Console.Error.WriteLine("usage: VectorKit.Fuzz <target> [--replay <path>...] | seeds <folder> | list");
    Console.Error.WriteLine($"targets: {string.Join(", ", FuzzTargets.Names)}");
    return 2;
}

if (args[0] == "list")
{
    Console.WriteLine(string.Join('\n', FuzzTargets.Names));
    return 0;
}

if (args[0] == "seeds")
{
    Seeds.Write(args.Length > 1 ? args[1] : "seeds");
    return 0;
}

string target = args[0];
if (!FuzzTargets.Names.Contains(target))
{
    Console.Error.WriteLine($"unknown target '{target}'; targets: {string.Join(", ", FuzzTargets.Names)}");
    return 2;
}

if (args.Length > 1 && args[1] == "--replay")
{
    return Replay.Run(target, args.Skip(2).ToArray());
}

Fuzzer.Run(stream =>
{
    var buffer = new MemoryStream();
    stream.CopyTo(buffer);
    byte[] input = buffer.ToArray();
    long cap = FuzzTargets.AllocationCap(target, input.Length);
    Usage usage = Usage.Measure(() => FuzzTargets.Run(target, input));
    if (usage.ManagedBytes > cap || usage.ResidentGrowthBytes > cap)
    {
        throw new FuzzFindingException($"input of {input.Length} bytes allocated {usage.ManagedBytes:N0} managed bytes, resident memory grew {usage.ResidentGrowthBytes:N0} bytes (cap {cap:N0})");
    }
});
return 0;

/// <summary>What one input cost: managed bytes allocated (all threads) and growth of the peak resident set.</summary>
internal readonly record struct Usage(long ManagedBytes, long ResidentGrowthBytes, FuzzOutcome Outcome)
{
    // Managed: GC.GetTotalAllocatedBytes(precise) before and after, which counts every managed allocation (an upper
    // bound on the largest one). Native (the index's row buffers use NativeMemory): the peak resident set (VmHWM) is
    // reset through /proc/self/clear_refs before the input and read after it, minus the resident set before.
    public static Usage Measure(Func<FuzzOutcome> run)
    {
        long residentBefore = ResetPeakAndReadResident();
        long managedBefore = GC.GetTotalAllocatedBytes(precise: true);
        FuzzOutcome outcome = run();
        long managed = GC.GetTotalAllocatedBytes(precise: true) - managedBefore;
        long peak = ReadStatus("VmHWM:");
        return new Usage(managed, residentBefore < 0 || peak < 0 ? 0 : Math.Max(0, peak - residentBefore), outcome);
    }

    private static long ResetPeakAndReadResident()
    {
        try
        {
            File.WriteAllText("/proc/self/clear_refs", "5");
            return ReadStatus("VmRSS:");
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            return -1;
        }
    }

    private static long ReadStatus(string key)
    {
        try
        {
            foreach (string line in File.ReadLines("/proc/self/status"))
            {
                if (line.StartsWith(key, StringComparison.Ordinal))
                {
                    return long.Parse(line.AsSpan(key.Length).Trim().TrimEnd("kB").Trim(), CultureInfo.InvariantCulture) * 1024;
                }
            }
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
        }

        return -1;
    }
}

/// <summary>Replays inputs once each, reporting outcome, cost and findings.</summary>
internal static class Replay
{
    public static int Run(string target, string[] paths)
    {
        // Files of the folders given, except hidden ones and those under hidden folders (afl's .state copies).
        var files = paths.SelectMany(p => Directory.Exists(p)
                ? Directory.EnumerateFiles(p, "*", SearchOption.AllDirectories)
                    .Where(f => !Path.GetRelativePath(p, f).Split(Path.DirectorySeparatorChar).Any(part => part.StartsWith('.')))
                : [p])
            .Where(f => Path.GetFileName(f) != "README.txt")
            .Order(StringComparer.Ordinal)
            .ToList();
        int accepted = 0, rejected = 0, findings = 0;
        long maxManaged = 0, maxResident = 0;
        string maxManagedFile = "-", maxResidentFile = "-";
        // Warm-up (JIT, first-use buffers) so that the resident growth measured below belongs to the inputs.
        foreach (string file in files.Take(20))
        {
            ((IAsyncResult)Task.Run(() => FuzzTargets.Run(target, File.ReadAllBytes(file)))).AsyncWaitHandle.WaitOne(TimeSpan.FromSeconds(10));
        }

        foreach (string file in files)
        {
            byte[] input = File.ReadAllBytes(file);
            GC.Collect(2, GCCollectionMode.Forced, blocking: true, compacting: true);
            var clock = Stopwatch.StartNew();
            var task = Task.Factory.StartNew(() => Usage.Measure(() => FuzzTargets.Run(target, input)), TaskCreationOptions.LongRunning);
            if (!((IAsyncResult)task).AsyncWaitHandle.WaitOne(TimeSpan.FromSeconds(10)))
            {
                Console.WriteLine($"HANG     {file}: still running after 10 s");
                Console.Out.Flush();
                Environment.Exit(1);
            }

            if (task.Exception is { } error)
            {
                findings++;
                Console.WriteLine($"FINDING  {file}: {error.InnerException}");
                continue;
            }

            Usage usage = task.Result;
            long cap = FuzzTargets.AllocationCap(target, input.Length);
            if (usage.ManagedBytes > cap || usage.ResidentGrowthBytes > cap)
            {
                findings++;
                Console.WriteLine($"FINDING  {file}: {input.Length}-byte input allocated {usage.ManagedBytes:N0} managed bytes, resident +{usage.ResidentGrowthBytes:N0} B (cap {cap:N0})");
            }

            if (usage.Outcome == FuzzOutcome.Accepted)
            {
                accepted++;
            }
            else
            {
                rejected++;
            }

            if (usage.ManagedBytes > maxManaged)
            {
                (maxManaged, maxManagedFile) = (usage.ManagedBytes, file);
            }

            if (usage.ResidentGrowthBytes > maxResident)
            {
                (maxResident, maxResidentFile) = (usage.ResidentGrowthBytes, file);
            }

            Console.WriteLine($"{usage.Outcome,-8} {file} ({input.Length} B): managed {usage.ManagedBytes:N0} B, resident +{usage.ResidentGrowthBytes:N0} B, {clock.Elapsed.TotalMilliseconds:F1} ms");
        }

        Console.WriteLine($"replay {target}: {files.Count} inputs, {accepted} accepted, {rejected} rejected, {findings} findings");
        Console.WriteLine($"largest managed allocation per input: {maxManaged:N0} B ({maxManagedFile})");
        Console.WriteLine($"largest resident growth per input: {maxResident:N0} B ({maxResidentFile})");
        return findings == 0 ? 0 : 1;
    }
}

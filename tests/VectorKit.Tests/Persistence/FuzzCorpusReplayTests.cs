using VectorKit.Fuzz;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Replays the fuzzing corpus kept in fuzz/corpus/&lt;target&gt;/ (minimised afl queues and every crash and hang input
/// found, kept as regression inputs) through the same target code the afl harness runs (fuzz/VectorKit.Fuzz/FuzzTargets.cs,
/// compiled into this project): every input must be accepted and used, or be refused with an exception the API
/// documents for bad data; anything else, a hang or an outsized allocation fails the test with the input's name.
/// CI replays the corpus; campaigns are run by hand with scripts/fuzz.sh (docs/fuzzing.md).
/// </summary>
public class FuzzCorpusReplayTests
{
    private static readonly TimeSpan HangLimit = TimeSpan.FromSeconds(30);

    private static string CorpusFolder => Path.Combine(AppContext.BaseDirectory, "FuzzCorpus");

    public static TheoryData<string> Targets() => [.. FuzzTargets.Names];

    [Theory]
    [MemberData(nameof(Targets))]
    [Trait("Weakness", "fuzz corpus (CWE-20, CWE-125, CWE-400, CWE-789)")]
    public void EveryCorpusInput_IsAcceptedOrRejectedWithADocumentedException(string target)
    {
        string folder = Path.Combine(CorpusFolder, target);
        string[] files = Directory.Exists(folder) ? Directory.GetFiles(folder).Where(f => Path.GetFileName(f) != "README.txt").Order(StringComparer.Ordinal).ToArray() : [];
        Assert.True(files.Length > 0, $"fuzz/corpus/{target} has no inputs");
        int accepted = 0;
        foreach (string file in files)
        {
            (FuzzOutcome result, long allocated, int length) = Replay(target, file);

            long cap = FuzzTargets.AllocationCap(target, length);
            Assert.True(allocated <= cap, $"{target}/{Path.GetFileName(file)}: a {length}-byte input allocated {allocated:N0} managed bytes (cap {cap:N0})");
            accepted += result == FuzzOutcome.Accepted ? 1 : 0;
        }

        // The corpus holds valid files too, so the targets' accepting paths stay covered.
        Assert.True(accepted > 0, $"no input of fuzz/corpus/{target} was accepted");
    }

    [Fact]
    public void TheMappedTargetsGraphSeeds_OpenAndAreSearched()
    {
        // Valid graph files of every variant and of the versions with and without an id order: the target must open
        // them mapped (both presets) and walk them, so the replay above covers the mapped graph's accepting path.
        string[] seeds = Directory.GetFiles(Path.Combine(CorpusFolder, "index-mapped"), "seed-graph-*").Order(StringComparer.Ordinal).ToArray();
        Assert.True(seeds.Length >= 6, $"fuzz/corpus/index-mapped has {seeds.Length} graph seeds");
        foreach (string seed in seeds)
        {
            Assert.Equal((Path.GetFileName(seed), FuzzOutcome.Accepted), (Path.GetFileName(seed), Replay("index-mapped", seed).Outcome));
        }
    }

    // Runs one input on a worker with a hang guard; returns its outcome and the managed bytes it allocated.
    private static (FuzzOutcome Outcome, long Allocated, int Length) Replay(string target, string file)
    {
        byte[] input = File.ReadAllBytes(file);
        var task = Task.Factory.StartNew(
            () =>
            {
                long before = GC.GetAllocatedBytesForCurrentThread();
                FuzzOutcome outcome = FuzzTargets.Run(target, input);
                return (outcome, GC.GetAllocatedBytesForCurrentThread() - before);
            },
            TaskCreationOptions.LongRunning);
        bool finished = ((IAsyncResult)task).AsyncWaitHandle.WaitOne(HangLimit);
        Assert.True(finished, $"{target}/{Path.GetFileName(file)}: did not finish within {HangLimit.TotalSeconds} s");
        Assert.True(task.Exception is null, $"{target}/{Path.GetFileName(file)}: {task.Exception?.InnerException}");
        return (task.Result.outcome, task.Result.Item2, input.Length);
    }
}

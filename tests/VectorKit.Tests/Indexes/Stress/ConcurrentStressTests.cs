using System.Diagnostics;
using Xunit.Abstractions;

namespace VectorKit.Tests.Indexes.Stress;

/// <summary>
/// Concurrent writers, readers and saves on every index kind and encoding, checked against a sequential model of the
/// acknowledged writes (<see cref="StressRun"/>). The normal test run does one short round per variant; set
/// <c>VECTORKIT_STRESS_OPERATIONS</c> or <c>VECTORKIT_STRESS_MINUTES</c> (and <c>VECTORKIT_STRESS_SEED</c>) for a long
/// run of the same code, as <c>scripts/stress.sh</c> does.
/// </summary>
/// <remarks>
/// The class name is kept out of scripts/test.sh's SIMD re-run filter on purpose: the kernels behind every search are
/// covered there by the kernel and contract tests, and this run's cost is in threads and checks, not in a SIMD width.
/// </remarks>
public class ConcurrentStressTests(ITestOutputHelper output)
{
    public static TheoryData<string> Variants => new(StressVariant.Names);

    [Theory]
    [MemberData(nameof(Variants))]
    public void WritersReadersAndSaves_AgreeWithTheModel(string variant)
    {
        (int seed, int? operations, double? minutes) = StressSettings.FromEnvironment();
        StressVariant kind = StressVariant.Get(variant);
        var total = new StressCounters();
        var failures = new List<string>();
        var clock = Stopwatch.StartNew();
        int rounds = 0;
        do
        {
            int roundSeed = unchecked(seed + rounds);
            StressSettings settings = operations is null && minutes is null
                ? StressSettings.Short(roundSeed)
                : StressSettings.Long(roundSeed, operations ?? 20_000);
            var run = new StressRun(kind, settings);
            failures.AddRange(run.Run());
            total.Add(run.Counters);
            rounds++;
        }
        while (failures.Count == 0 && minutes is not null && clock.Elapsed.TotalMinutes < minutes.Value / StressVariant.Names.Count);

        output.WriteLine($"Concurrent stress {variant}: {rounds} round(s) from seed {seed} in {clock.Elapsed.TotalSeconds:F1} s: {total}; {failures.Count} failure(s).");
        Assert.True(failures.Count == 0, string.Join(Environment.NewLine, failures));
    }
}

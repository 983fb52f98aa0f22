using System.Globalization;

namespace VectorKit.Tests.Indexes.Stress;

/// <summary>
/// How much work one round of a stress run does, in operations (never in time), and its seed. The short defaults run
/// in the normal test run; <c>VECTORKIT_STRESS_OPERATIONS</c> (operations per variant and round, writers and readers
/// together), <c>VECTORKIT_STRESS_MINUTES</c> (rounds repeat, each with the next seed, until each variant has had its
/// share of the minutes) and <c>VECTORKIT_STRESS_SEED</c> make a long run of the same code (scripts/stress.sh).
/// </summary>
internal sealed record StressSettings(int Seed, int WriterOperations, int ReaderOperations, int SavesPerPhase, int Phases, int IdsPerWriter)
{
    public const int Writers = 2;
    public const int Readers = 2;

    /// <summary>The normal test run's round: a few seconds per variant on two shared cores.</summary>
    public static StressSettings Short(int seed) => new(seed, WriterOperations: 240, ReaderOperations: 240, SavesPerPhase: 2, Phases: 3, IdsPerWriter: 240);

    /// <summary>A round of about <paramref name="operations"/> operations (writers and readers together), with a checkpoint every 1,000 writes or so.</summary>
    public static StressSettings Long(int seed, int operations)
    {
        int writes = Math.Max(Writers * 50, operations / 2) / Writers;
        int reads = Math.Max(Readers * 50, operations - (writes * Writers)) / Readers;
        int phases = Math.Max(3, writes * Writers / 1000);
        return new(seed, writes, reads, SavesPerPhase: 2, phases, IdsPerWriter: 400);
    }

    public int Operations => (WriterOperations * Writers) + (ReaderOperations * Readers);

    /// <summary>The environment's settings: (seed, operations per round or null, minutes or null).</summary>
    public static (int Seed, int? Operations, double? Minutes) FromEnvironment()
    {
        int seed = int.TryParse(Environment.GetEnvironmentVariable("VECTORKIT_STRESS_SEED"), NumberStyles.Integer, CultureInfo.InvariantCulture, out int s) ? s : 20261202;
        int? operations = int.TryParse(Environment.GetEnvironmentVariable("VECTORKIT_STRESS_OPERATIONS"), NumberStyles.Integer, CultureInfo.InvariantCulture, out int o) && o > 0 ? o : null;
        double? minutes = double.TryParse(Environment.GetEnvironmentVariable("VECTORKIT_STRESS_MINUTES"), NumberStyles.Float, CultureInfo.InvariantCulture, out double m) && m > 0 ? m : null;
        return (seed, operations, minutes);
    }
}

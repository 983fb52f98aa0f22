using System.Collections.Concurrent;
using VectorKit.Indexes;
using VectorKit.Persistence;
using VectorKit.Tests.Indexes.Contract;

namespace VectorKit.Tests.Indexes.Stress;

/// <summary>
/// One round of concurrent stress on one index: writers (each on its own ids), readers and a saver run together for a
/// fixed number of operations per phase; after each phase, with every thread stopped, a checkpoint compares the whole
/// index with the model (<see cref="StressModel"/>). The operation sequences follow from the seed; only the
/// interleaving varies between runs.
/// </summary>
internal sealed partial class StressRun
{
    private const int K = 10;
    private const int Dim = StressVariant.Dimension;
    private const int MaxFailures = 10;

    // A thread that has not finished after this long is reported as hung (a guard, not a measurement).
    private static readonly TimeSpan HangGuard = TimeSpan.FromMinutes(10);

    private readonly StressVariant _variant;
    private readonly StressSettings _settings;
    private readonly StressModel _model = new();
    private readonly ConcurrentQueue<string> _failures = new();
    private readonly ConcurrentQueue<Action> _deferred = new();
    private readonly float[] _queries;
    private readonly long[][] _ids;
    private readonly bool[][] _present;
    private readonly string _folder;
    private IVectorIndex _index = null!;
    private long _writesThisPhase;
    private volatile bool _stop;

    public StressRun(StressVariant variant, StressSettings settings)
    {
        _variant = variant;
        _settings = settings;
        _queries = ContractData.Rows(512, Dim, settings.Seed ^ 0x5EED);
        _ids = new long[StressSettings.Writers][];
        _present = new bool[StressSettings.Writers][];
        for (int w = 0; w < StressSettings.Writers; w++)
        {
            // Disjoint per writer, negative and positive, not dense.
            long sign = w % 2 == 0 ? 1 : -1;
            _ids[w] = Enumerable.Range(0, settings.IdsPerWriter).Select(i => sign * (((w + 1) * 1_000_000L) + (i * 7L))).ToArray();
            _present[w] = new bool[settings.IdsPerWriter];
        }

        _folder = Path.Combine(Path.GetTempPath(), $"vectorkit-stress-{Environment.ProcessId}-{variant.Name}-{settings.Seed}");
    }

    public StressCounters Counters { get; } = new();

    /// <summary>Runs the round; returns the failures found (empty when every check passed).</summary>
    public IReadOnlyCollection<string> Run()
    {
        Directory.CreateDirectory(_folder);
        try
        {
            using IVectorIndex index = _variant.Create();
            _index = index;
            for (int phase = 0; phase < _settings.Phases && !_stop; phase++)
            {
                RunPhase(phase);
                if (!_stop)
                {
                    Guard($"checkpoint after phase {phase}", () => Checkpoint(phase));
                }
            }
        }
        finally
        {
            Directory.Delete(_folder, recursive: true);
        }

        return _failures;
    }

    private void RunPhase(int phase)
    {
        _writesThisPhase = 0;
        int writes = Share(_settings.WriterOperations, phase);
        int reads = Share(_settings.ReaderOperations, phase);
        var threads = new List<(string Name, Thread Thread)>();
        for (int w = 0; w < StressSettings.Writers; w++)
        {
            int writer = w;
            threads.Add(($"writer {w}", new Thread(() => WriterLoop(writer, phase, writes))));
        }

        for (int r = 0; r < StressSettings.Readers; r++)
        {
            int reader = r;
            threads.Add(($"reader {r}", new Thread(() => ReaderLoop(reader, phase, reads))));
        }

        threads.Add(("saver", new Thread(() => SaverLoop(phase, writes * StressSettings.Writers))));
        foreach ((string _, Thread thread) in threads)
        {
            thread.IsBackground = true;
            thread.Start();
        }

        foreach ((string name, Thread thread) in threads)
        {
            if (!thread.Join(HangGuard))
            {
                Fail($"phase {phase}: the {name} did not finish within {HangGuard.TotalMinutes} minutes (hang or deadlock)");
                _stop = true;
                return;
            }
        }
    }

    // Operations of a phase: an equal share, the last phase taking the remainder.
    private int Share(int total, int phase)
        => phase < _settings.Phases - 1 ? total / _settings.Phases : total - (total / _settings.Phases * (_settings.Phases - 1));

    private Random RandomFor(int role, int phase) => new(unchecked((_settings.Seed * 1_000_003) + (role * 7919) + (phase * 104_729)));

    private void Guard(string where, Action action)
    {
        try
        {
            action();
        }
        catch (Exception e)
        {
            Fail($"{where}: {(e is StressFailure or Xunit.Sdk.XunitException ? e.Message : e.ToString())}");
        }
    }

    private void Fail(string message)
    {
        _failures.Enqueue($"[{_variant.Name}, seed {_settings.Seed}] {message}");
        if (_failures.Count >= MaxFailures)
        {
            _stop = true;
        }
    }

    private static double Distance(float[] query, float[] x)
    {
        double sum = 0;
        for (int j = 0; j < query.Length; j++)
        {
            double difference = (double)query[j] - x[j];
            sum += difference * difference;
        }

        return sum;
    }

    // As the contract suite's distance check: relative to the squared norms involved; codes are measured in float on
    // decoded values, so they get ten times the room.
    private double Tolerance(float[] query, float[] x, bool exactDistances)
        => (exactDistances ? 2e-5 : 2e-4) * (1 + query.Sum(v => (double)v * v) + x.Sum(v => (double)v * v));

    private float[] Query(int row) => _queries.AsSpan(row * Dim, Dim).ToArray();

    private static bool SameBits(float[] a, float[] b)
    {
        for (int j = 0; j < a.Length; j++)
        {
            if (BitConverter.SingleToInt32Bits(a[j]) != BitConverter.SingleToInt32Bits(b[j]))
            {
                return false;
            }
        }

        return true;
    }

    private static string Show(float[]? v) => v is null ? "absent" : "[" + string.Join(", ", v.Take(4).Select(x => x.ToString("R", System.Globalization.CultureInfo.InvariantCulture))) + ", ...]";
}

namespace VectorKit.Tests.Indexes.Stress;

/// <summary>
/// The sequential model of a concurrent stress run: for every id, the versions it went through (a vector, or absent),
/// each stamped with the logical times of the write that made it (called, returned) and of the write that ended it.
/// </summary>
/// <remarks>
/// One counter orders every event: a writer takes a time just before it calls the index and another just after the
/// call returns; a reader takes one before and one after its call. Each writer owns its ids, so the writes of an id
/// are ordered. A version may be seen by a read whose window [start, end] overlaps [called, end of the next write's
/// return], and must be seen by one whose window lies inside [returned, next write called]: whatever the interleaving,
/// a correct index passes both checks. Times taken outside the model's lock only widen the first interval and narrow the
/// second, which keeps the checks sound.
/// </remarks>
internal sealed class StressModel
{
    private readonly object _gate = new();
    private readonly Dictionary<long, List<StressVersion>> _history = [];
    private long _clock;

    /// <summary>Takes the next logical time.</summary>
    public long Tick() => Interlocked.Increment(ref _clock);

    /// <summary>Records that a write of <paramref name="vectors"/> (null: a removal) to <paramref name="ids"/> is being called.</summary>
    public void Begin(ReadOnlySpan<long> ids, IReadOnlyList<float[]?> vectors)
    {
        lock (_gate)
        {
            long called = Tick();
            for (int i = 0; i < ids.Length; i++)
            {
                List<StressVersion> versions = VersionsOf(ids[i]);
                versions[^1].NextCalled = called;
                versions.Add(new StressVersion(vectors[i], called));
            }
        }
    }

    /// <summary>Records that the write last begun on <paramref name="ids"/> returned; <paramref name="stored"/> is what the index holds for each.</summary>
    public void End(ReadOnlySpan<long> ids, IReadOnlyList<float[]?> stored)
    {
        long returned = Tick();
        lock (_gate)
        {
            for (int i = 0; i < ids.Length; i++)
            {
                List<StressVersion> versions = _history[ids[i]];
                versions[^1].Returned = returned;
                versions[^1].Stored = stored[i];
                versions[^2].NextReturned = returned;
            }
        }
    }

    /// <summary>Runs <paramref name="read"/> on the histories under the model's lock.</summary>
    public T Read<T>(Func<IReadOnlyDictionary<long, List<StressVersion>>, T> read)
    {
        lock (_gate)
        {
            return read(_history);
        }
    }

    /// <summary>The current version of every id ever written (no write may be running).</summary>
    public Dictionary<long, StressVersion> Current()
    {
        lock (_gate)
        {
            return _history.ToDictionary(p => p.Key, p => p.Value[^1]);
        }
    }

    /// <summary>Drops every version but the current one (no write or read may be running).</summary>
    public void Prune()
    {
        lock (_gate)
        {
            foreach (List<StressVersion> versions in _history.Values)
            {
                if (versions.Count > 1)
                {
                    versions.RemoveRange(0, versions.Count - 1);
                }
            }
        }
    }

    /// <summary>The versions of <paramref name="id"/> a read over [<paramref name="start"/>, <paramref name="end"/>] may have seen.</summary>
    public static IEnumerable<StressVersion> Possible(IReadOnlyDictionary<long, List<StressVersion>> history, long id, long start, long end)
        => history.TryGetValue(id, out List<StressVersion>? versions)
            ? versions.Where(v => v.Called <= end && v.NextReturned >= start)
            : [];

    /// <summary>The version of an id a read over [<paramref name="start"/>, <paramref name="end"/>] must have seen, if one held throughout.</summary>
    public static StressVersion? Stable(List<StressVersion> versions, long start, long end)
    {
        foreach (StressVersion v in versions)
        {
            if (v.Returned < start && v.NextCalled > end)
            {
                return v;
            }
        }

        return null;
    }

    private List<StressVersion> VersionsOf(long id)
    {
        if (!_history.TryGetValue(id, out List<StressVersion>? versions))
        {
            versions = [new StressVersion(null, 0) { Returned = 0 }];
            _history.Add(id, versions);
        }

        return versions;
    }
}

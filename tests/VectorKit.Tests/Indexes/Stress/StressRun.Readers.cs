using VectorKit.Indexes;
using VectorKit.Persistence;

namespace VectorKit.Tests.Indexes.Stress;

/// <summary>
/// The readers and the saver: each call is bracketed by two logical times, and its answer is checked only for what
/// holds under every interleaving of the writes that overlapped it (<see cref="StressModel"/>).
/// </summary>
internal sealed partial class StressRun
{
    private void ReaderLoop(int reader, int phase, int operations)
    {
        Random random = RandomFor(100 + reader, phase);
        for (int op = 0; op < operations && !_stop; op++)
        {
            Guard($"phase {phase}, reader {reader}, read {op}", () => ReadOnce(random));
        }
    }

    private void ReadOnce(Random random)
    {
        int kind = random.Next(10);
        SearchOptions options = random.Next(2) == 0 ? SearchOptions.Default : _variant.WideSearch;
        if (kind < 4)
        {
            float[] query = Query(random.Next(_queries.Length / Dim));
            long start = _model.Tick();
            SearchHit[] hits = _index.Search(query, K, options);
            long end = _model.Tick();
            Interlocked.Increment(ref Counters.Searches);
            CheckHits(query, hits, options, start, end, batch: false);
        }
        else if (kind < 6)
        {
            int count = 2 + random.Next(3);
            int first = random.Next((_queries.Length / Dim) - count);
            float[] queries = _queries.AsSpan(first * Dim, count * Dim).ToArray();
            long start = _model.Tick();
            BatchSearchResults results = _index.SearchBatch(queries, K, options);
            long end = _model.Tick();
            Interlocked.Increment(ref Counters.BatchSearches);
            Expect(results.QueryCount == count, $"a batch of {count} queries has {results.QueryCount} results");
            for (int q = 0; q < count; q++)
            {
                CheckHits(Query(first + q), results[q].ToArray(), options, start, end, batch: true);
            }
        }
        else
        {
            int writer = random.Next(StressSettings.Writers);
            long id = _ids[writer][random.Next(_ids[writer].Length)];
            var vector = new float[Dim];
            long start = _model.Tick();
            bool found = kind < 8 ? _index.TryGetVector(id, vector) : _index.Contains(id);
            long end = _model.Tick();
            Interlocked.Increment(ref kind < 8 ? ref Counters.VectorReads : ref Counters.ContainsCalls);
            _model.Read(history => CheckItem(history, id, found, kind < 8 ? vector : null, start, end, "read"));
        }
    }

    /// <summary>
    /// A search's hits: best first, no id twice; each id held a vector at some time during the call and the distance is
    /// to one such vector; and a search that measures every item misses none that held throughout the call and beats
    /// its last hit.
    /// </summary>
    private void CheckHits(float[] query, SearchHit[] hits, SearchOptions options, long start, long end, bool batch)
    {
        AssertBestFirst(hits);
        bool scansAll = _variant.IsExact || (_variant.WideSearchScansAll && ReferenceEquals(options, _variant.WideSearch));
        _model.Read(history =>
        {
            foreach (SearchHit hit in hits)
            {
                List<StressVersion> candidates = StressModel.Possible(history, hit.Id, start, end).Where(v => v.Vector is not null).ToList();
                Expect(candidates.Count > 0, $"search returned id {hit.Id}, which held no vector at any time during the search");
                if (!candidates.Any(v => DistanceMatches(query, hit.Distance, v)))
                {
                    if (candidates.Any(v => Measured(v) is null))
                    {
                        // A candidate's stored code is known only once its write returns: check again at the checkpoint.
                        _deferred.Enqueue(() => CheckDistanceLater(query, hit, candidates));
                        continue;
                    }

                    throw new StressFailure(
                        $"search returned id {hit.Id} at distance {hit.Distance}; the vectors it held during the search are at "
                        + string.Join(", ", candidates.Select(v => Distance(query, Measured(v)!).ToString("R", System.Globalization.CultureInfo.InvariantCulture))));
                }

                Interlocked.Increment(ref Counters.HitsChecked);
            }

            if (!scansAll)
            {
                return 0;
            }

            var returned = hits.Select(h => h.Id).ToHashSet();
            int held = 0;
            foreach ((long id, List<StressVersion> versions) in history)
            {
                StressVersion? stable = StressModel.Stable(versions, start, end);
                if (stable?.Vector is null)
                {
                    continue;
                }

                held++;
                if (_variant.RanksByReportedDistance && !returned.Contains(id))
                {
                    // Fewer than k hits: the index held fewer than k items at the moment it answered, so all of them.
                    float[] x = Measured(stable)!;
                    double d = Distance(query, x);
                    Expect(
                        hits.Length == K && d >= hits[^1].Distance - Tolerance(query, x, _variant.ReportsExactDistances),
                        $"an exhaustive {(batch ? "batch " : "")}search missed id {id} at {d}, present throughout, better than its last hit "
                        + (hits.Length == K ? $"({hits[^1].Id} at {hits[^1].Distance})" : $"(it returned {hits.Length} of {K})")
                        + $"; search window [{start}, {end}], the id's writes {Stamps(versions)}; hits {string.Join(' ', hits.Select(h => h.Id))}");
                }
            }

            Expect(hits.Length >= Math.Min(K, held), $"an exhaustive search returned {hits.Length} hits; {held} items were present throughout");
            Interlocked.Increment(ref Counters.CompletenessChecks);
            return 0;
        });
    }

    /// <summary>The vector the variant's distances are to: the vector written, or the decoded code (null while unknown).</summary>
    private float[]? Measured(StressVersion v) => _variant.ReportsExactDistances ? v.Vector : v.Stored;

    private static string Stamps(List<StressVersion> versions)
        => string.Join(", ", versions.Select(v => $"{(v.Vector is null ? "absent" : "vector")} called {v.Called} returned {v.Returned}"));

    private bool DistanceMatches(float[] query, float distance, StressVersion v)
    {
        float[]? x = Measured(v);
        return x is not null && Math.Abs(distance - Distance(query, x)) <= Tolerance(query, x, _variant.ReportsExactDistances);
    }

    private void CheckDistanceLater(float[] query, SearchHit hit, List<StressVersion> candidates)
    {
        Interlocked.Increment(ref Counters.Deferred);
        Expect(
            candidates.Any(v => DistanceMatches(query, hit.Distance, v)),
            $"search returned id {hit.Id} at distance {hit.Distance}; the vectors it held during the search are at "
            + string.Join(", ", candidates.Select(v => Measured(v) is { } x ? Distance(query, x).ToString("R", System.Globalization.CultureInfo.InvariantCulture) : "(write failed)")));
    }

    /// <summary>
    /// A presence (and, when <paramref name="vector"/> is given, the vector read) against the versions the id held during
    /// the call: the same bits as one of them.
    /// </summary>
    private int CheckItem(IReadOnlyDictionary<long, List<StressVersion>> history, long id, bool found, float[]? vector, long start, long end, string what)
    {
        List<StressVersion> candidates = StressModel.Possible(history, id, start, end).ToList();
        if (!found)
        {
            if (candidates.Count > 0 && candidates.All(v => v.Vector is not null))
            {
                throw new StressFailure($"{what}: id {id} not found, but it held a vector throughout ({Show(candidates[0].Vector)})");
            }
        }
        else
        {
            Expect(candidates.Any(v => v.Vector is not null), $"{what}: id {id} found, but it held no vector at any time during the call");
            if (vector is not null && !candidates.Any(v => v.Vector is not null && v.Stored is not null && SameBits(v.Stored, vector)))
            {
                if (candidates.Any(v => v.Vector is not null && v.Stored is null))
                {
                    // What a write in flight stores is known once it returns: check again at the checkpoint.
                    _deferred.Enqueue(() =>
                    {
                        Interlocked.Increment(ref Counters.Deferred);
                        Expect(
                            candidates.Any(v => v.Stored is not null && SameBits(v.Stored, vector)),
                            $"{what}: id {id} read as {Show(vector)}; during the call it held {string.Join(" or ", candidates.Select(v => Show(v.Stored ?? v.Vector)))}");
                    });
                }
                else
                {
                    throw new StressFailure($"{what}: id {id} read as {Show(vector)}; during the call it held {string.Join(" or ", candidates.Select(v => Show(v.Stored ?? v.Vector)))}");
                }
            }
        }

        Interlocked.Increment(ref Counters.ItemsChecked);
        return 0;
    }

    /// <summary>
    /// Saves while the writers run, spread over the phase by their progress, then loads the copy and checks it item by
    /// item: a save sees one state, so every item holds one of the versions it had during the save, and an item that
    /// held one version throughout has exactly that one.
    /// </summary>
    private void SaverLoop(int phase, int phaseWrites)
    {
        for (int save = 0; save < _settings.SavesPerPhase && !_stop; save++)
        {
            long due = (long)phaseWrites * (save + 1) / (_settings.SavesPerPhase + 1);
            while (Interlocked.Read(ref _writesThisPhase) < due && !_stop)
            {
                Thread.Sleep(1);
            }

            int which = save;
            Guard($"phase {phase}, save {save}", () => SaveAndCheck(toFile: (phase + which) % 2 == 1));
        }
    }

    private void SaveAndCheck(bool toFile)
    {
        long start = _model.Tick();
        using IVectorIndex copy = SaveAndLoad(_index, toFile);
        long end = _model.Tick();
        Interlocked.Increment(ref Counters.Saves);
        long[] ids = copy.GetIds();
        Expect(copy.Count == ids.Length, $"the loaded copy counts {copy.Count} items and lists {ids.Length}");
        var vectors = new Dictionary<long, float[]>();
        foreach (long id in ids)
        {
            var vector = new float[Dim];
            Expect(copy.TryGetVector(id, vector), $"the loaded copy lists id {id} but has no vector for it");
            vectors.Add(id, vector);
        }

        _model.Read(history =>
        {
            foreach ((long id, float[] vector) in vectors)
            {
                CheckItem(history, id, found: true, vector, start, end, "saved copy");
            }

            foreach ((long id, List<StressVersion> versions) in history)
            {
                StressVersion? stable = StressModel.Stable(versions, start, end);
                if (stable is not null)
                {
                    Expect(vectors.ContainsKey(id) == stable.Vector is not null, $"saved copy: id {id} is {(vectors.ContainsKey(id) ? "present" : "absent")}, but it was {(stable.Vector is null ? "absent" : "present")} throughout the save");
                    Interlocked.Increment(ref Counters.ItemsChecked);
                }
            }

            return 0;
        });
    }

    private IVectorIndex SaveAndLoad(IVectorIndex index, bool toFile)
    {
        if (toFile)
        {
            string path = Path.Combine(_folder, "saved.vkx");
            IndexFile.Save(index, path);
            return IndexFile.Load(path);
        }

        using var stream = new MemoryStream();
        IndexFile.Save(index, stream);
        stream.Position = 0;
        return IndexFile.Load(stream);
    }

    /// <summary>Ascending distance, ties by ascending id, no id twice.</summary>
    private static void AssertBestFirst(SearchHit[] hits)
    {
        var seen = new HashSet<long>();
        for (int i = 0; i < hits.Length; i++)
        {
            Expect(float.IsFinite(hits[i].Distance), $"hit {i} (id {hits[i].Id}) has distance {hits[i].Distance}");
            Expect(seen.Add(hits[i].Id), $"id {hits[i].Id} appears twice in one result");
            if (i > 0)
            {
                SearchHit a = hits[i - 1], b = hits[i];
                Expect(a.Distance < b.Distance || (a.Distance == b.Distance && a.Id < b.Id), $"hits {i - 1} ({a.Id}, {a.Distance}) and {i} ({b.Id}, {b.Distance}) are out of order");
            }
        }
    }
}

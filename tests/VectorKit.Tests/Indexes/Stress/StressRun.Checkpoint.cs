using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Tests.Indexes.Contract;

namespace VectorKit.Tests.Indexes.Stress;

/// <summary>The checkpoint between phases: every thread stopped, the whole index against the model.</summary>
internal sealed partial class StressRun
{
    private const int CheckpointQueries = 24;
    private const int SelfSearches = 40;

    private void Checkpoint(int phase)
    {
        Interlocked.Increment(ref Counters.Checkpoints);
        while (_deferred.TryDequeue(out Action? check))
        {
            Guard($"phase {phase}, deferred check", check);
        }

        _model.Prune();
        Dictionary<long, StressVersion> current = _model.Current();
        Dictionary<long, StressVersion> live = current.Where(p => p.Value.Vector is not null).ToDictionary();

        // Every acknowledged write is there: the ids, the count, each vector; nothing removed remains.
        Expect(_index.Count == live.Count, $"Count is {_index.Count}, the model holds {live.Count}");
        long[] ids = _index.GetIds();
        Expect(ids.SequenceEqual(live.Keys.Order()), $"GetIds lists {ids.Length} ids, the model {live.Count}; first difference at {FirstDifference(ids, live.Keys.Order().ToArray())}");
        var vector = new float[Dim];
        foreach ((long id, StressVersion version) in current)
        {
            bool found = _index.TryGetVector(id, vector);
            Expect(found == version.Vector is not null && _index.Contains(id) == found, $"id {id}: TryGetVector says {found}, Contains {_index.Contains(id)}, the model {(version.Vector is null ? "absent" : "present")}");
            if (found)
            {
                Expect(SameBits(version.Stored!, vector), $"id {id} reads {Show(vector)}, it was stored as {Show(version.Stored)}");
                _variant.AssertStored(_index, version.Vector!, vector);
            }

            Counters.ItemsChecked++;
        }

        // Searches: only live ids, right distances; exhaustive ones equal the reference; recall at the variant's floor.
        float[] queries = ContractData.Rows(CheckpointQueries, Dim, unchecked(_settings.Seed + (phase * 31) + 17));
        BatchSearchResults batch = _index.SearchBatch(queries, K, _variant.WideSearch);
        double recall = 0;
        var wideAnswers = new List<SearchHit[]>();
        for (int q = 0; q < CheckpointQueries; q++)
        {
            float[] query = Query(queries, q);
            SearchHit[] byDefault = _index.Search(query, K);
            SearchHit[] wide = _index.Search(query, K, _variant.WideSearch);
            wideAnswers.Add(wide);
            foreach (SearchHit[] hits in new[] { byDefault, wide, batch[q].ToArray() })
            {
                AssertBestFirst(hits);
                foreach (SearchHit hit in hits)
                {
                    Expect(live.TryGetValue(hit.Id, out StressVersion? v), $"checkpoint search returned id {hit.Id}, which is not present");
                    Expect(DistanceMatches(query, hit.Distance, v!), $"checkpoint search returned id {hit.Id} at {hit.Distance}; its vector is at {Distance(query, Measured(v!)!)}");
                }

                Counters.HitsChecked += hits.Length;
            }

            List<long> truth = live.OrderBy(p => Distance(query, p.Value.Vector!)).ThenBy(p => p.Key).Take(K).Select(p => p.Key).ToList();
            recall += truth.Count == 0 ? 1 : (double)wide.Count(h => truth.Contains(h.Id)) / truth.Count;
            if (_variant.IsExact)
            {
                AssertTopK(query, byDefault, live, "default search");
            }

            if (_variant.WideSearchScansAll && _variant.RanksByReportedDistance)
            {
                AssertTopK(query, wide, live, "wide search");
            }

            Counters.CheckpointQueries++;
        }

        recall /= CheckpointQueries;
        Expect(recall >= _variant.RecallFloor, $"mean recall@{K} under the wide search is {recall:F3}, below the floor {_variant.RecallFloor}");

        // An item's own stored vector finds it (graphs: counted, since between global passes a group of nodes may be cut off).
        foreach ((long id, StressVersion v) in live.OrderBy(p => p.Key).Where((_, i) => i % Math.Max(1, live.Count / SelfSearches) == 0))
        {
            bool hit = _index.Search(v.Stored!, K, _variant.WideSearch).Any(h => h.Id == id);
            if (!hit && _variant.IsGraph)
            {
                Counters.SelfSearchMisses++;
            }
            else
            {
                Expect(hit, $"a wide search for the stored vector of id {id} does not return it");
            }
        }

        if (_variant.IsGraph)
        {
            List<string> problems = ((GraphIndex)_index).CheckInvariants(reachability: false);
            Expect(problems.Count == 0, $"graph invariants: {string.Join("; ", problems.Take(5))}");
        }

        // A save taken now reloads equal to the model, and answers as the index does.
        using IVectorIndex copy = SaveAndLoad(_index, toFile: phase % 2 == 0);
        Interlocked.Increment(ref Counters.Saves);
        Expect(copy.Count == live.Count && copy.GetIds().SequenceEqual(live.Keys.Order()), $"the checkpoint's saved copy holds {copy.Count} items, the model {live.Count}");
        foreach ((long id, StressVersion v) in live)
        {
            Expect(copy.TryGetVector(id, vector) && SameBits(v.Stored!, vector), $"the checkpoint's saved copy reads id {id} as {Show(vector)}, stored {Show(v.Stored)}");
            Counters.ItemsChecked++;
        }

        for (int q = 0; q < CheckpointQueries; q++)
        {
            SearchHit[] again = copy.Search(Query(queries, q), K, _variant.WideSearch);
            Expect(again.SequenceEqual(wideAnswers[q]), $"the checkpoint's saved copy answers query {q} with {string.Join(' ', again.Select(h => h.Id))}, the index with {string.Join(' ', wideAnswers[q].Select(h => h.Id))}");
        }
    }

    /// <summary>
    /// The hits are the reference's top k over the stored vectors (in double), ties allowed either way: every hit is
    /// within the k-th reference distance, and every item clearly nearer than it is returned.
    /// </summary>
    private void AssertTopK(float[] query, SearchHit[] hits, Dictionary<long, StressVersion> live, string what)
    {
        List<(long Id, double Distance, float[] X)> reference = live
            .Select(p => (p.Key, Distance(query, Measured(p.Value)!), Measured(p.Value)!))
            .OrderBy(t => t.Item2).ThenBy(t => t.Key).ToList();
        int expected = Math.Min(K, reference.Count);
        Expect(hits.Length == expected, $"{what}: {hits.Length} hits, expected {expected}");
        if (expected == 0)
        {
            return;
        }

        double kth = reference[expected - 1].Distance;
        var returned = hits.Select(h => h.Id).ToHashSet();
        foreach ((long id, double d, float[] x) in reference)
        {
            double tolerance = Tolerance(query, x, _variant.ReportsExactDistances);
            if (returned.Contains(id))
            {
                Expect(d <= kth + tolerance, $"{what}: id {id} at {d} returned, the {K}th nearest is at {kth}");
            }
            else
            {
                Expect(d >= kth - tolerance, $"{what}: id {id} at {d} missed, the {K}th nearest is at {kth}");
            }
        }
    }

    private static float[] Query(float[] queries, int q) => queries.AsSpan(q * Dim, Dim).ToArray();

    private static string FirstDifference(long[] a, long[] b)
    {
        int i = 0;
        while (i < a.Length && i < b.Length && a[i] == b[i])
        {
            i++;
        }

        return $"position {i} ({(i < a.Length ? a[i].ToString() : "end")} vs {(i < b.Length ? b[i].ToString() : "end")})";
    }
}

using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>Compact releases space without changing what the index holds or answers.</summary>
public abstract partial class IndexContractTests
{
    [Theory]
    [MemberData(nameof(Metrics))]
    public void Compact_AfterRemovals_ChangesNoIdsVectorsOrResults(DistanceMetric metric)
    {
        using Filled filled = Fill(metric, 500);
        IVectorIndex index = filled.Index;
        index.RemoveRange(filled.Ids.Where((_, i) => i % 3 == 0).ToArray());
        float[] queries = Queries(12);
        string before = Snapshot(index, queries);
        BatchSearchResults wideBefore = index.SearchBatch(queries, K, WideSearch);

        string idsAndVectors = Snapshot(index, []);

        int reported = -1;
        index.Compact(new SynchronousProgress<int>(done => reported = Math.Max(reported, done)));
        Assert.Equal(idsAndVectors, Snapshot(index, []));
        BatchSearchResults wideAfter = index.SearchBatch(queries, K, WideSearch);
        if (!CompactRebuilds)
        {
            Assert.Equal(before, Snapshot(index, queries));
            for (int q = 0; q < 12; q++)
            {
                Assert.Equal(wideBefore[q].ToArray(), wideAfter[q].ToArray());
            }
        }
        else
        {
            // A rebuilt search structure may find other near neighbours, but each item keeps its distance and the
            // wide search finds as much of the old answer as the variant's recall floor promises of the true one.
            double overlap = 0;
            for (int q = 0; q < 12; q++)
            {
                var old = wideBefore[q].ToArray().ToDictionary(h => h.Id, h => h.Distance);
                foreach (SearchHit hit in wideAfter[q])
                {
                    if (old.TryGetValue(hit.Id, out float distance))
                    {
                        Assert.Equal(distance, hit.Distance);
                        overlap++;
                    }
                }
            }

            overlap /= 12 * K;
            Assert.True(overlap >= RecallFloor, $"after Compact the wide search finds {overlap:F3} of its earlier results");
        }

        Assert.True(reported <= index.Count, $"Compact reported {reported} items processed of {index.Count}");
    }

    [Fact]
    public void Compact_WithACancelledToken_ThrowsAndChangesNothing()
    {
        using Filled filled = Fill(DistanceMetric.SquaredEuclidean, 300);
        IVectorIndex index = filled.Index;
        index.RemoveRange(filled.Ids.Where((_, i) => i % 4 == 0).ToArray());
        float[] queries = Queries(5);
        string before = Snapshot(index, queries);
        long bytes = index.MemoryBytes;
        using var cancelled = new CancellationTokenSource();
        cancelled.Cancel();
        Assert.ThrowsAny<OperationCanceledException>(() => index.Compact(null, cancelled.Token));
        Assert.Equal(before, Snapshot(index, queries));
        Assert.Equal(bytes, index.MemoryBytes);
    }
}

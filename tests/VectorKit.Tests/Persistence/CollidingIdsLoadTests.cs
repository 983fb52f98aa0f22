using System.Buffers.Binary;
using System.Diagnostics;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using Xunit.Abstractions;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Files whose ids all share one default 64-bit hash code, <c>(i &lt;&lt; 32) | i</c>: loading them under
/// <see cref="IndexLoadOptions.Untrusted"/> must cost about what loading the same file with ordinary ids costs.
/// </summary>
/// <remarks>
/// Each kind's file is saved once with ids 0 .. n-1 and copied with every id rewritten to its crafted form, so the two
/// loads differ only in the ids. The crafted load must end within a budget set by the ordinary load in the same run
/// (a multiple of its time plus a margin); with the default hash of <see cref="long"/>, 10^6 crafted ids take hours.
/// </remarks>
public class CollidingIdsLoadTests(ITestOutputHelper output)
{
    public static TheoryData<string, int> Kinds => new()
    {
        { "exact", 1_000_000 },
        { "inverted-file", 1_000_000 },
        { "graph", 1_000_000 },
    };

    [Theory]
    [MemberData(nameof(Kinds))]
    public async Task CraftedCollidingIds_LoadWithinTheBudgetOfOrdinaryIds(string kind, int count)
    {
        byte[] ordinary = SavedWithOrdinaryIds(kind, count);
        byte[] crafted = (byte[])ordinary.Clone();
        int rewritten = RewriteIds(crafted, id => (id << 32) | id);
        Assert.Equal(count, rewritten);

        // Warm the loader once, then time the ordinary file; the crafted one gets 10 times that plus two seconds.
        using (IndexFileBytes.Load(ordinary, IndexLoadOptions.Untrusted))
        {
        }

        var clock = Stopwatch.StartNew();
        using (IndexFileBytes.Load(ordinary, IndexLoadOptions.Untrusted))
        {
        }

        TimeSpan ordinaryTime = clock.Elapsed;
        TimeSpan budget = (ordinaryTime * 10) + TimeSpan.FromSeconds(2);
        clock.Restart();

        // Waited for, not cancelled: hashing the ids happens after the reads that observe a token, and a regression
        // should fail here rather than hang the run.
        Task<IVectorIndex> loading = Task.Run(() => IndexFileBytes.Load(crafted, IndexLoadOptions.Untrusted));
        IVectorIndex loaded;
        try
        {
            loaded = await loading.WaitAsync(budget);
        }
        catch (TimeoutException)
        {
            Assert.Fail($"loading {count:N0} crafted ids took longer than {budget.TotalSeconds:F1} s (ordinary ids: {ordinaryTime.TotalSeconds:F2} s)");
            throw;
        }

        output.WriteLine($"{kind}: {count:N0} ids, ordinary {ordinaryTime.TotalMilliseconds:F0} ms, crafted {clock.Elapsed.TotalMilliseconds:F0} ms");
        using (loaded)
        {
            Assert.Equal(count, loaded.Count);
            for (long i = 0; i < count; i += count / 100)
            {
                Assert.True(loaded.Contains((i << 32) | i));
                Assert.False(loaded.Contains(i == 0 ? 1L << 32 : i));
            }

            long[] ids = loaded.GetIds();
            Assert.Equal(Enumerable.Range(0, count).Select(i => ((long)i << 32) | (uint)i), ids);
        }
    }

    private static byte[] SavedWithOrdinaryIds(string kind, int count)
    {
        const int Dimension = 2;
        var random = new Random(17);
        float[] data = new float[count * Dimension];
        for (int i = 0; i < data.Length; i++)
        {
            data[i] = (float)random.NextDouble();
        }

        long[] ids = [.. Enumerable.Range(0, count).Select(i => (long)i)];
        using VectorIndex index = kind switch
        {
            "exact" => new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean),
            "inverted-file" => new InvertedFileIndex(Dimension, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 4, SampleSize = 1_000 }),
            _ => new GraphIndex(Dimension, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { LinksPerNode = 4, BuildWidth = 8, Seed = 3 }),
        };
        if (index is ITrainableIndex trainable)
        {
            trainable.Train(data.AsSpan(0, 1_000 * Dimension));
        }

        index.AddRange(ids, data);
        return IndexFileBytes.Save(index);
    }

    // Rewrites every id in the file's id section and fixes the checksums; returns how many ids it rewrote.
    private static int RewriteIds(byte[] file, Func<long, long> rewrite)
    {
        SectionSpan section = IndexFileBytes.Map(file).Single(s => s.Id == (uint)SectionId.Ids);
        Span<byte> payload = file.AsSpan((int)section.PayloadStart, (int)section.Length);
        for (int at = 0; at < payload.Length; at += sizeof(long))
        {
            BinaryPrimitives.WriteInt64LittleEndian(payload[at..], rewrite(BinaryPrimitives.ReadInt64LittleEndian(payload[at..])));
        }

        IndexFileBytes.FixChecksums(file);
        return payload.Length / sizeof(long);
    }
}

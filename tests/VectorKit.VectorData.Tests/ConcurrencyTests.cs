using Microsoft.Extensions.VectorData;

namespace VectorKit.VectorData.Tests;

/// <summary>Writers and readers at once: a reader sees every batch whole or not at all.</summary>
public class ConcurrencyTests
{
    [Fact]
    public async Task Readers_see_whole_batches_while_writers_upsert_and_delete()
    {
        const int BatchSize = 8;
        using var store = new VectorKitStore();
        var collection = store.GetCollection<int, GearItem>("gear");
        await collection.EnsureCollectionExistsAsync();
        using var stop = new CancellationTokenSource();

        // Batch b holds ids b*8 .. b*8+7, all with Count = b; odd batches are deleted again right away.
        Task writer = Task.Run(async () =>
        {
            for (int b = 0; b < 150; b++)
            {
                int batch = b;
                await collection.UpsertAsync(Enumerable.Range(0, BatchSize).Select(i => new GearItem
                {
                    Id = (batch * BatchSize) + i,
                    Count = batch,
                    Category = "Pack",
                    Embedding = new float[] { batch, i, 0, 1 },
                }));
                if (batch % 2 == 1)
                {
                    await collection.DeleteAsync(Enumerable.Range(batch * BatchSize, BatchSize));
                }
            }
        });

        int checks = 0;
        while (!writer.IsCompleted)
        {
            var seen = await collection.SearchAsync(new float[] { 75, 4, 0, 1 }, 10_000, new VectorSearchOptions<GearItem> { Filter = r => r.Category == "Pack" })
                .Select(r => r.Record.Count).ToListAsync();
            foreach (var group in seen.GroupBy(c => c))
            {
                Assert.Equal(BatchSize, group.Count());
            }

            checks++;
        }

        await writer;
        Assert.True(checks > 0);
        Assert.Equal(75 * BatchSize, await collection.GetAsync(r => true, 100_000).CountAsync());
    }

    [Fact]
    public async Task A_cancelled_upsert_writes_nothing()
    {
        using var store = new VectorKitStore();
        var collection = store.GetCollection<int, GearItem>("gear");
        await collection.EnsureCollectionExistsAsync();
        using var cancelled = new CancellationTokenSource();
        await cancelled.CancelAsync();
        await Assert.ThrowsAnyAsync<OperationCanceledException>(() => collection.UpsertAsync([new GearItem { Id = 1, Embedding = new float[4] }], cancelled.Token));
        await Assert.ThrowsAnyAsync<OperationCanceledException>(async () => await collection.SearchAsync(new float[4], 1, cancellationToken: cancelled.Token).ToListAsync());
        Assert.Null(await collection.GetAsync(1));
    }
}

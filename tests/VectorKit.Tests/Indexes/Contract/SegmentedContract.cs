using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Persistence;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>
/// The whole contract, writes included, of a <see cref="SegmentedIndex"/> over a mapped base of variant
/// <typeparamref name="TVariant"/>. An empty index wraps the variant's empty index, saved and opened mapped; a filled
/// one puts most items into the variant's index before it is saved, and writes the rest through the segments: every
/// eighth item is added there, and every eighth other item is replaced by its own row (so the base masks it and a
/// segment answers for it). Every expectation (exactness, recall floor, code bytes, options) is the variant's: the
/// segments are exact, so they can only add to what the base finds.
/// </summary>
/// <typeparam name="TVariant">The variant of the base; one whose searches return full-precision distances from full vectors kept in the index.</typeparam>
public abstract class SegmentedContract<TVariant> : IndexContractTests
    where TVariant : IndexContractTests, new()
{
    private readonly TVariant _variant = new();

    protected override bool IsExact => _variant.Facts.IsExact;

    protected override double RecallFloor => _variant.Facts.RecallFloor;

    protected override SearchOptions WideSearch => _variant.Facts.WideSearch;

    // Rows in the base are the file's pages, rows in the segments are in memory.
    private protected override bool? CountsStoredRows => null;

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        using IVectorIndex built = _variant.NewIndex(dimension, metric);
        return Open(built);
    }

    private protected override IVectorIndex Build(int dimension, DistanceMetric metric, long[] ids, float[] data)
    {
        int[] inBase = [.. Enumerable.Range(0, ids.Length).Where(i => i % 8 != 7)];
        SegmentedIndex index;
        using (IVectorIndex built = _variant.NewIndex(dimension, metric, [.. inBase.Select(i => ids[i])], [.. inBase.SelectMany(i => data.AsSpan(i * dimension, dimension).ToArray())]))
        {
            index = Open(built);
        }

        int[] added = [.. Enumerable.Range(0, ids.Length).Where(i => i % 8 == 7)];
        AddRange(index, [.. added.Select(i => ids[i])], [.. added.SelectMany(i => data.AsSpan(i * dimension, dimension).ToArray())]);
        for (int i = 3; i < ids.Length; i += 8)
        {
            Assert.True(AddOrReplace(index, ids[i], data.AsSpan(i * dimension, dimension).ToArray()));
        }

        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => _variant.CodeBytesOf(dimension);

    private protected override void AssertOptions(IVectorIndex index) => ReopenedIndex.AssertSameSettings(_variant.LastGivenOptions!, index.Options);

    private static SegmentedIndex Open(IVectorIndex built)
        => ReopenedIndex.SaveAndOpen(built, path => SegmentedIndex.Open(path, MappedOpenOptions.Untrusted));
}

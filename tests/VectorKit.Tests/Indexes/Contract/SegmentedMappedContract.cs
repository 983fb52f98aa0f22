using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Persistence;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>
/// A <see cref="SegmentedIndex"/> over an empty exact index file opened mapped: every write goes to the in-memory
/// segment beside the read-only mapped base, and every search merges both.
/// </summary>
public sealed class SegmentedMappedContract : IndexContractTests
{
    protected override bool IsExact => true;

    // Exhaustive search over every part: every true neighbour, always.
    protected override double RecallFloor => 1.0;

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        string path = Path.Combine(Path.GetTempPath(), $"vectorkit-contract-{Guid.NewGuid():N}.vkx");
        using (var empty = new ExactIndex(dimension, metric))
        {
            IndexFile.Save(empty, path);
        }

        SegmentedIndex index = SegmentedIndex.Open(path);

        // The mapping keeps the file's pages; the name is not needed once it is open.
        File.Delete(path);
        Given(index.Options);
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => 4 * dimension;
}

using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The exact index over float32 rows.</summary>
public sealed class ExactFloat32Contract : IndexContractTests
{
    protected override bool IsExact => true;

    // Exhaustive search: every true neighbour, always.
    protected override double RecallFloor => 1.0;

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
        => new ExactIndex(dimension, metric, Given(new ExactIndexOptions()));

    protected override int ExpectedCodeBytes(int dimension) => 4 * dimension;
}

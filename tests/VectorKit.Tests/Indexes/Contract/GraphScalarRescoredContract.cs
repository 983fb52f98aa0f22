using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The graph index over 8-bit codes, re-scoring the best 50 candidates on full vectors kept in memory.</summary>
public sealed class GraphScalarRescoredContract : IndexContractTests
{
    protected override bool IsExact => false;

    // A wide beam, then exact re-scoring of the best 50 by code distance: measured 1.000 under every metric. A missing
    // or wrong re-scoring step falls to the codes-only figure (about 0.95).
    protected override double RecallFloor => 0.99;

    protected override bool CompactRebuilds => true;

    protected override bool CancelledWriteRestoresLinks => false;

    protected override SearchOptions WideSearch { get; } = new() { SearchWidth = 256 };

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new GraphIndex(dimension, metric, Given(ContractGraphOptions.Scalar(50)));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => (dimension + 15) / 16 * 16;
}

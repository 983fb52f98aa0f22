using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The graph index over 8-bit codes, without re-scoring.</summary>
public sealed class GraphScalarContract : IndexContractTests
{
    protected override bool IsExact => false;

    // A beam of 256 over 2,000 items reaches nearly every node, so code error bounds the recall as in the exact 8-bit
    // scan: measured 0.947 (cosine) to 0.975. Lost links or unreachable nodes fall below.
    protected override double RecallFloor => 0.92;

    protected override bool ReportsExactDistances => false;

    protected override bool DecodesStoredVectors => true;

    private protected override void AssertDecoded(IVectorIndex index, double[] encoded, float[] decoded)
        => CodeRanges.ForTraining(index.Dimension, index.Metric).AssertDecoded(encoded, decoded);

    protected override bool CompactRebuilds => true;

    protected override bool CancelledWriteRestoresLinks => false;

    protected override SearchOptions WideSearch { get; } = new() { SearchWidth = 256 };

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new GraphIndex(dimension, metric, Given(ContractGraphOptions.Scalar(0)));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => (dimension + 15) / 16 * 16;
}

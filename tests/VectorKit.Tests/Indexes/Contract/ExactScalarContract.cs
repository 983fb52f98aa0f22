using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The exact index over 8-bit codes, without re-scoring: distances are to the decoded codes.</summary>
public sealed class ExactScalarContract : IndexContractTests
{
    protected override bool IsExact => false;

    // Every code is scanned, so only code error (and clamping at the trained ranges) reorders near neighbours: measured
    // 0.947 (cosine) to 0.975 on this set. A scan that skips rows or mis-decodes codes falls far below; random answers
    // score about 0.005.
    protected override double RecallFloor => 0.92;

    protected override bool ReportsExactDistances => false;

    protected override bool DecodesStoredVectors => true;

    private protected override void AssertDecoded(IVectorIndex index, double[] encoded, float[] decoded)
        => CodeRanges.ForTraining(index.Dimension, index.Metric).AssertDecoded(encoded, decoded);

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new ExactIndex(dimension, metric, Given(new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit }));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => (dimension + 15) / 16 * 16;
}

using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The exact index over 8-bit codes, re-scoring the best 50 candidates on full vectors kept in memory.</summary>
public sealed class ExactScalarRescoredContract : IndexContractTests
{
    protected override bool IsExact => false;

    // The best 50 by code distance re-scored exactly: measured 1.000 under every metric; without re-scoring about 0.95.
    protected override double RecallFloor => 0.99;

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new ExactIndex(dimension, metric, Given(new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 50 }));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => (dimension + 15) / 16 * 16;
}

using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The exact index over 8-bit codes, re-scoring the best 50 candidates on full vectors read from an external source.</summary>
public sealed class ExactScalarExternalContract : IndexContractTests
{
    protected override bool IsExact => false;

    // As re-scoring from memory (the source holds the same vectors): measured 1.000.
    protected override double RecallFloor => 0.99;

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var options = Given(new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 50, FullVectors = FullVectorLocation.ExternalSource });
        var index = new ExactIndex(dimension, metric, options, SourceFor(dimension));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => (dimension + 15) / 16 * 16;
}

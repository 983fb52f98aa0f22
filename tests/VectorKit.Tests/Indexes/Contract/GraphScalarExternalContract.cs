using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The graph index over 8-bit codes, re-scoring the best 50 candidates on full vectors from an external source.</summary>
public sealed class GraphScalarExternalContract : IndexContractTests
{
    protected override bool IsExact => false;

    // As re-scoring from memory (the source holds the same vectors): measured 1.000, but the graph under it can miss a
    // few items under inner product (see the float32 variant). Reading the wrong rows falls far below.
    protected override double RecallFloor => 0.95;

    protected override bool CompactRebuilds => true;

    protected override bool CancelledWriteRestoresLinks => false;

    protected override SearchOptions WideSearch { get; } = new() { SearchWidth = 256 };

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new GraphIndex(dimension, metric, Given(ContractGraphOptions.Scalar(50, FullVectorLocation.ExternalSource)), SourceFor(dimension));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => (dimension + 15) / 16 * 16;
}

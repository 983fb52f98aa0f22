using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The graph index over 8-bit codes, without re-scoring.</summary>
public sealed class GraphScalarContract : IndexContractTests
{
    protected override bool IsExact => false;

    // A wide beam over codes: code error reorders near neighbours, as in the exact 8-bit scan.
    protected override double RecallFloor => 0.95;

    protected override bool ReportsExactDistances => false;

    protected override double? StoredVectorTolerance => 0.015;

    protected override SearchOptions WideSearch { get; } = new() { SearchWidth = 256 };

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new GraphIndex(dimension, metric, Given(ContractGraphOptions.Scalar(0)));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => (dimension + 15) / 16 * 16;
}

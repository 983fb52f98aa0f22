using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The inverted-file index over 8-bit codes of the residuals, without re-scoring.</summary>
public sealed class InvertedFileScalarContract : IndexContractTests
{
    protected override bool IsExact => false;

    // Every list probed; residual codes are finer than whole-vector codes, so only near ties reorder.
    protected override double RecallFloor => 0.95;

    protected override bool ReportsExactDistances => false;

    protected override double? StoredVectorTolerance => 0.015;

    protected override SearchOptions WideSearch { get; } = new() { SearchWidth = ContractInvertedFileOptions.Lists };

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new InvertedFileIndex(dimension, metric, Given(ContractInvertedFileOptions.For(VectorEncoding.Scalar8Bit, dimension)));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => (dimension + 15) / 16 * 16;
}

using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The inverted-file index over float32 lists.</summary>
public sealed class InvertedFileFloat32Contract : IndexContractTests
{
    protected override bool IsExact => false;

    // The wide search probes every list of float32 rows: an exhaustive exact search.
    protected override double RecallFloor => 1.0;

    protected override SearchOptions WideSearch { get; } = new() { SearchWidth = ContractInvertedFileOptions.Lists };

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new InvertedFileIndex(dimension, metric, Given(ContractInvertedFileOptions.For(VectorEncoding.Float32, dimension)));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => 4 * dimension;
}

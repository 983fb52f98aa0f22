using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The inverted-file index over product codes, re-scoring the best 50 candidates on full vectors from an external source.</summary>
public sealed class InvertedFileProductExternalContract : IndexContractTests
{
    protected override bool IsExact => false;

    // As re-scoring from memory (the source holds the same vectors): measured 1.000.
    protected override double RecallFloor => 0.99;

    protected override SearchOptions WideSearch { get; } = new() { SearchWidth = ContractInvertedFileOptions.Lists };

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var options = Given(ContractInvertedFileOptions.For(VectorEncoding.ProductCodes, dimension, rescoreDepth: 50, FullVectorLocation.ExternalSource));
        var index = new InvertedFileIndex(dimension, metric, options, SourceFor(dimension));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => dimension / 2;
}

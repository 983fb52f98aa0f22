using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The inverted-file index over product codes, re-scoring the best 50 candidates on full vectors kept in memory.</summary>
public sealed class InvertedFileProductRescoredContract : IndexContractTests
{
    protected override bool IsExact => false;

    // Every list probed; 8-byte codes of 16 components rank the true top 10 inside the best 50 nearly always.
    protected override double RecallFloor => 0.97;

    protected override SearchOptions WideSearch { get; } = new() { SearchWidth = ContractInvertedFileOptions.Lists };

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new InvertedFileIndex(dimension, metric, Given(ContractInvertedFileOptions.For(VectorEncoding.ProductCodes, dimension, rescoreDepth: 50)));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => dimension / 2;
}

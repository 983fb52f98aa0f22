using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The inverted-file index over product codes, re-scoring the best 50 candidates on full vectors kept in memory.</summary>
public sealed class InvertedFileProductRescoredContract : IndexContractTests
{
    protected override bool IsExact => false;

    // Every list probed, then the best 50 by product-code distance re-scored exactly: measured 1.000 under every metric.
    // Without (or with broken) re-scoring, 8-byte codes of 16 components rank far worse.
    protected override double RecallFloor => 0.99;

    protected override SearchOptions WideSearch { get; } = new() { SearchWidth = ContractInvertedFileOptions.Lists };

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new InvertedFileIndex(dimension, metric, Given(ContractInvertedFileOptions.For(VectorEncoding.ProductCodes, dimension, rescoreDepth: 50)));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => dimension / 2;
}

using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The inverted-file index over 8-bit codes of the residuals, without re-scoring.</summary>
public sealed class InvertedFileScalarContract : IndexContractTests
{
    private readonly System.Runtime.CompilerServices.ConditionalWeakTable<IVectorIndex, CodeRanges> _residualRanges = [];

    protected override bool IsExact => false;

    // Every list probed; residual codes are finer than whole-vector ones, so only near ties reorder: measured 0.982 to
    // 0.990. Wrong list assignment or residual decoding falls far below.
    protected override double RecallFloor => 0.96;

    protected override bool ReportsExactDistances => false;

    protected override bool DecodesStoredVectors => true;

    // The code is of the residual from the item's list centroid (the one nearest to it), clamped to the ranges of the
    // training rows' residuals.
    private protected override void AssertDecoded(IVectorIndex index, double[] encoded, float[] decoded)
    {
        float[] centroids = ((InvertedFileIndex)index).GetCentroids();
        CodeRanges ranges = _residualRanges.GetValue(index, _ => CodeRanges.OfResiduals(index.Dimension, index.Metric, centroids));
        int list = CodeRanges.Nearest(encoded, centroids);
        double[] centroid = centroids.AsSpan(list * index.Dimension, index.Dimension).ToArray().Select(v => (double)v).ToArray();
        ranges.AssertDecoded(encoded, decoded, centroid);
    }

    protected override SearchOptions WideSearch { get; } = new() { SearchWidth = ContractInvertedFileOptions.Lists };

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new InvertedFileIndex(dimension, metric, Given(ContractInvertedFileOptions.For(VectorEncoding.Scalar8Bit, dimension)));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => (dimension + 15) / 16 * 16;
}

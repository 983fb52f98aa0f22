using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using Xunit;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>The shared bad-input checks on a trained 8-bit graph index.</summary>
public class Scalar8BitGraphIndexInputTests : VectorIndexInputTests
{
    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var graph = new GraphIndex(dimension, metric, new GraphIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 4 });
        var random = new Random(dimension);
        graph.Train(Enumerable.Range(0, 4 * dimension).Select(_ => (float)((random.NextDouble() * 20) - 10)).ToArray());
        return graph;
    }

    [Fact]
    public void StorageAndDepthOptions_NameTheOptionAndTheAllowedRange()
    {
        Assert.Contains("Encoding must be one of Float32, Scalar8Bit for GraphIndexOptions; got 7", Assert.Throws<ArgumentOutOfRangeException>(() => new GraphIndexOptions { Encoding = (VectorEncoding)7 }).Message);
        Assert.Contains("RescoreDepth must be 0 (off) or in [1, 100000]; got -1", Assert.Throws<ArgumentOutOfRangeException>(() => new GraphIndexOptions { RescoreDepth = -1 }).Message);
    }
}

using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using Xunit;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>The shared bad-input checks on the graph index, plus its own options.</summary>
public class GraphIndexInputTests : VectorIndexInputTests
{
    protected override IVectorIndex Create(int dimension, DistanceMetric metric) => new GraphIndex(dimension, metric);

    [Fact]
    public void Options_RejectOutOfRangeValues()
        => Assert.Contains("InitialCapacity", Assert.Throws<ArgumentOutOfRangeException>(() => new GraphIndexOptions { InitialCapacity = -1 }).Message);

    [Fact]
    public void GraphOptions_NameTheOptionAndTheAllowedRange()
    {
        Assert.Contains("LinksPerNode must be in [2, 512]; got 1", Assert.Throws<ArgumentOutOfRangeException>(() => new GraphIndexOptions { LinksPerNode = 1 }).Message);
        Assert.Contains("LinksPerNode must be in [2, 512]; got 513", Assert.Throws<ArgumentOutOfRangeException>(() => new GraphIndexOptions { LinksPerNode = 513 }).Message);
        Assert.Contains("BottomLayerLinks must be in [2, 512]; got 0", Assert.Throws<ArgumentOutOfRangeException>(() => new GraphIndexOptions { BottomLayerLinks = 0 }).Message);
        Assert.Contains("BuildWidth must be in [1, 100000]; got 0", Assert.Throws<ArgumentOutOfRangeException>(() => new GraphIndexOptions { BuildWidth = 0 }).Message);
        Assert.Contains("SearchWidth must be in [1, 100000]; got -5", Assert.Throws<ArgumentOutOfRangeException>(() => new GraphIndexOptions { SearchWidth = -5 }).Message);
        Assert.Contains("MaxDegreeOfParallelism must be -1 (all cores) or a positive thread count; got 0", Assert.Throws<ArgumentOutOfRangeException>(() => new GraphIndexOptions { MaxDegreeOfParallelism = 0 }).Message);
        Assert.Contains("FilteredExactScanFraction must be in [0, 1], or null for the cost model; got 1.5", Assert.Throws<ArgumentOutOfRangeException>(() => new GraphIndexOptions { FilteredExactScanFraction = 1.5 }).Message);
        Assert.Contains("FilteredExactScanFraction must be in [0, 1]", Assert.Throws<ArgumentOutOfRangeException>(() => new GraphIndexOptions { FilteredExactScanFraction = double.NaN }).Message);
        Assert.Equal(32, new GraphIndexOptions().EffectiveBottomLayerLinks);
        Assert.Equal(12, new GraphIndexOptions { LinksPerNode = 5, BottomLayerLinks = 12 }.EffectiveBottomLayerLinks);
    }
}

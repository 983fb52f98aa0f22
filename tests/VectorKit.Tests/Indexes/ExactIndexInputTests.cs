using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using Xunit;

namespace VectorKit.Tests.Indexes;

/// <summary>The shared bad-input checks on the exact index, plus its own options.</summary>
public class ExactIndexInputTests : VectorIndexInputTests
{
    protected override IVectorIndex Create(int dimension, DistanceMetric metric) => new ExactIndex(dimension, metric);

    [Fact]
    public void Options_RejectOutOfRangeValues()
        => Assert.Contains("InitialCapacity", Assert.Throws<ArgumentOutOfRangeException>(() => new ExactIndexOptions { InitialCapacity = -1 }).Message);
}

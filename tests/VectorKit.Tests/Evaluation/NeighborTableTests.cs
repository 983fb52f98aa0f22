using VectorKit.Evaluation;
using Xunit;

namespace VectorKit.Tests.Evaluation;

public class NeighborTableTests
{
    [Fact]
    public void RaggedRowsKeepTheirLengthsAndOrder()
    {
        NeighborTable table = NeighborTable.FromRows([[5, 3, 9], [], [1]]);
        Assert.Equal(3, table.QueryCount);
        Assert.Equal(3, table.K);
        Assert.Equal(new long[] { 5, 3, 9 }, table[0].ToArray());
        Assert.True(table[1].IsEmpty);
        Assert.Equal(new long[] { 1 }, table[2].ToArray());
    }

    [Theory]
    [InlineData(-1)]
    [InlineData(2)]
    public void RowsOutsideTheTableAreRejected(int queryIndex)
    {
        NeighborTable table = NeighborTable.FromRows([[1], [2]]);
        var error = Assert.Throws<ArgumentOutOfRangeException>(() => table[queryIndex].Length);
        Assert.StartsWith($"queryIndex must be in [0, 2); got {queryIndex}.", error.Message);
    }
}

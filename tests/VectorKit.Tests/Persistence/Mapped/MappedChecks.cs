using VectorKit.Indexes;
using Xunit;

namespace VectorKit.Tests.Persistence.Mapped;

/// <summary>Checks shared by the mapped-opening tests of every kind.</summary>
internal static class MappedChecks
{
    /// <summary>The mapped index holds the saved one's ids and vectors, and agrees on ids it does not hold.</summary>
    public static void AssertSameStoredItems(IVectorIndex saved, IVectorIndex mapped, ReadOnlySpan<long> absent)
    {
        Assert.Equal(saved.GetIds(), mapped.GetIds());
        var expected = new float[saved.Dimension];
        var actual = new float[saved.Dimension];
        foreach (long id in saved.GetIds())
        {
            Assert.True(mapped.Contains(id));
            Assert.True(saved.TryGetVector(id, expected));
            Assert.True(mapped.TryGetVector(id, actual));
            Assert.Equal(expected, actual);
        }

        foreach (long id in absent)
        {
            Assert.Equal(saved.Contains(id), mapped.Contains(id));
        }
    }
}

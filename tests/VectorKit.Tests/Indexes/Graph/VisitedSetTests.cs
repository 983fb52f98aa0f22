using VectorKit.Indexes.Graph;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>The walk's visited set against a plain set of marked slots, across many walks (its stamps wrap every 255).</summary>
public class VisitedSetTests
{
    [Fact]
    public void EveryWalkStartsEmpty_AcrossStampWraps()
    {
        var visited = new VisitedSet();
        var random = new Random(31);
        for (int walk = 0; walk < 700; walk++)
        {
            // Growing capacities now and then, as an index that grows between searches does.
            int capacity = 50 + (walk / 100 * 40);
            visited.Begin(capacity);
            var expected = new HashSet<int>();
            for (int i = 0; i < 60; i++)
            {
                int slot = random.Next(capacity);
                Assert.Equal(expected.Add(slot), visited.TryMark(slot));
            }
        }
    }
}

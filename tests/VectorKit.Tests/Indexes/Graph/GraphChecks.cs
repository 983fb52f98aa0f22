using VectorKit.Indexes.Graph;
using Xunit;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>Structural checks shared by the graph tests.</summary>
internal static class GraphChecks
{
    /// <summary>
    /// Asserts every structural invariant: no self links, links in range and on the right layers, no live node linking
    /// to a removed one (but a waypoint awaiting the global pass), counts within limits, a live entry point on the top level, and every live node reachable
    /// from the entry point on the bottom layer.
    /// </summary>
    public static void AssertSound(GraphIndex graph)
    {
        List<string> problems = graph.CheckInvariants();
        Assert.True(problems.Count == 0, $"{problems.Count} problems: " + string.Join("; ", problems.Take(20)));
    }
}

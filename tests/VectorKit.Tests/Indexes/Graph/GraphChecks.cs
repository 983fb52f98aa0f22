using VectorKit.Indexes.Graph;
using Xunit;

namespace VectorKit.Tests.Indexes.Graph;

/// <summary>Structural checks shared by the graph tests.</summary>
internal static class GraphChecks
{
    /// <summary>
    /// Asserts every structural invariant (no self links, links in range and on the right layers, counts within
    /// limits, a live entry point on the top level) and that at most <paramref name="maxUnreachableFraction"/> of the
    /// live nodes are unreachable from the entry point. Reachability is bounded, not required: the published pruning
    /// can take every in-link of a node, and this index does not yet repair that. Returns the unreachable count.
    /// </summary>
    public static int AssertSound(GraphIndex graph, double maxUnreachableFraction)
    {
        List<string> problems = graph.CheckInvariants();
        int unreachable = problems.Count(p => p.Contains("not reachable", StringComparison.Ordinal));
        List<string> structural = problems.FindAll(p => !p.Contains("not reachable", StringComparison.Ordinal));
        Assert.True(structural.Count == 0, string.Join("; ", structural));
        Assert.True(unreachable <= maxUnreachableFraction * graph.Count, $"{unreachable} of {graph.Count} live nodes are unreachable");
        return unreachable;
    }
}

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

    /// <summary>
    /// For a graph changed one item at a time since its last global pass: the local invariants (exact in-degrees, an
    /// in-link for every live node) hold now; full reachability once the pass has run. Between passes a group of nodes
    /// that only link to each other may be cut off, as the index documents, so asserting it earlier fails now and then.
    /// </summary>
    public static void AssertSoundAfterSingleChanges(GraphIndex graph)
    {
        List<string> local = graph.CheckInvariants(reachability: false);
        Assert.True(local.Count == 0, $"{local.Count} problems: " + string.Join("; ", local.Take(20)));
        graph.RunFullPass();
        AssertSound(graph);
    }
}

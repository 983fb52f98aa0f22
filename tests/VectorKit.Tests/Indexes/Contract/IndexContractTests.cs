using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>
/// The whole behaviour <see cref="IVectorIndex"/> promises for an index that takes writes: the read-only part
/// (<see cref="SearchContractTests"/>) and adds, replacements, removals, compaction, cancellation and bad write input,
/// checked the same way on every index kind and encoding: each variant is a small sealed subclass that says how to
/// build a ready, empty index and what quality to expect of it.
/// </summary>
public abstract partial class IndexContractTests : SearchContractTests
{
    /// <summary>Whether <see cref="IVectorIndex.Compact"/> rebuilds the search structure (so approximate answers may change).</summary>
    protected virtual bool CompactRebuilds => false;

    /// <summary>
    /// Whether a cancelled write restores the search structure too, so approximate searches return what they returned
    /// before. The graph links new items into existing lists and repairs them when it takes the items out again, so its
    /// items and vectors are restored but its links (and thus an approximate search's answer) may differ.
    /// </summary>
    protected virtual bool CancelledWriteRestoresLinks => true;
}

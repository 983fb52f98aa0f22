namespace VectorKit.Persistence;

/// <summary>
/// How <see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/> opens a file in place: the load caps, and whether the bulk sections are
/// verified before the index is returned.
/// </summary>
/// <remarks>
/// <para><b>Always checked at open</b> (cost independent of the item count): magic, version, header checksum, the caps
/// of <see cref="Load"/>, every section's position (computed from the header's lengths with checked arithmetic, never
/// read from the file), frames, zero padding, the file's exact length, each section's length against what the header's
/// counts require, and the checksum and values of the small sections (code ranges); a graph's levels (each within the
/// cap, together requiring exactly the upper-layer links' length).</para>
/// <para><b>Always checked on use</b>: every row number the file supplies (the id order) is bounds-checked before it
/// is followed, and a graph walk passes over link targets outside the nodes and reads a layer a node lacks as empty,
/// so no file can make a search or lookup read outside the mapping.</para>
/// <para><b>Checked only with <see cref="VerifyContents"/></b> (one pass over the whole file, no copy): the bulk
/// payloads' checksums, finite vector components, 8-bit codes' zero padding, an id order that is strictly
/// ascending (which also proves the ids unique) and, for a graph, names live nodes only, and a graph's structure as a
/// load checks it (link counts and targets, levels of link targets, the entry point, the live count). Without it a
/// damaged bulk section gives wrong answers, never an out-of-bounds read.</para>
/// <para>Instances are immutable and may be shared.</para>
/// </remarks>
public sealed class MappedOpenOptions
{
    private readonly IndexLoadOptions _load = IndexLoadOptions.Default;

    /// <summary>For files you wrote yourself: <see cref="IndexLoadOptions.Default"/> caps, bulk sections not re-verified (open time independent of the count).</summary>
    public static MappedOpenOptions Default { get; } = new();

    /// <summary>For files from outside your control: <see cref="IndexLoadOptions.Untrusted"/> caps and <see cref="VerifyContents"/> on.</summary>
    public static MappedOpenOptions Untrusted { get; } = new() { Load = IndexLoadOptions.Untrusted, VerifyContents = true };

    /// <summary>The caps on what the header may declare. Default <see cref="IndexLoadOptions.Default"/>.</summary>
    /// <exception cref="ArgumentNullException">The value is null.</exception>
    public IndexLoadOptions Load
    {
        get => _load;
        init => _load = value ?? throw new ArgumentNullException(nameof(Load));
    }

    /// <summary>Whether to verify the bulk sections at open (a pass over the whole file; see the remarks). Default false.</summary>
    public bool VerifyContents { get; init; }
}

using VectorKit.Distance;

namespace VectorKit.Persistence;

/// <summary>
/// What a saved index file holds, read from its header without loading the index: kind, metric, dimension, counts,
/// the stored settings and the sections with their sizes. Returned by <see cref="IndexFile.Inspect(string, bool, IndexLoadOptions?, CancellationToken)"/>.
/// </summary>
/// <remarks>
/// <see cref="Settings"/> uses the names the file format stores (for example <c>default-search-width</c> for a
/// graph's search width, <c>lists-probed</c> for an inverted file's, <c>vector-storage</c>/<c>list-storage</c> for the
/// encoding); docs/index-file-format.md lists them per kind.
/// </remarks>
public sealed class IndexFileSummary
{
    internal IndexFileSummary(
        IndexKind kind,
        DistanceMetric metric,
        int dimension,
        long count,
        long storedRows,
        int formatVersion,
        IReadOnlyDictionary<string, double> settings,
        IReadOnlyList<IndexFileSection> sections,
        long fileBytes,
        bool sectionsVerified)
    {
        Kind = kind;
        Metric = metric;
        Dimension = dimension;
        Count = count;
        StoredRows = storedRows;
        FormatVersion = formatVersion;
        Settings = settings;
        Sections = sections;
        FileBytes = fileBytes;
        SectionsVerified = sectionsVerified;
    }

    /// <summary>The kind of index the file holds.</summary>
    public IndexKind Kind { get; }

    /// <summary>The distance metric.</summary>
    public DistanceMetric Metric { get; }

    /// <summary>The vector dimension.</summary>
    public int Dimension { get; }

    /// <summary>The number of live items.</summary>
    public long Count { get; }

    /// <summary>The number of stored rows (for a graph, removed slots included; otherwise equal to <see cref="Count"/>).</summary>
    public long StoredRows { get; }

    /// <summary>The file format version.</summary>
    public int FormatVersion { get; }

    /// <summary>The kind-specific settings the header stores, by their file-format names, in ordinal order of name.</summary>
    public IReadOnlyDictionary<string, double> Settings { get; }

    /// <summary>The bulk sections, in file order.</summary>
    public IReadOnlyList<IndexFileSection> Sections { get; }

    /// <summary>The file's length in bytes.</summary>
    public long FileBytes { get; }

    /// <summary>
    /// Whether every section's checksum was read and matched (the inspection was asked to verify them). The header's
    /// own checksum is always verified; when this is <see langword="false"/>, the sections were not read at all.
    /// </summary>
    public bool SectionsVerified { get; }
}

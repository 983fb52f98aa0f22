namespace VectorKit.Persistence;

/// <summary>The kind of index a saved file holds. Values are stored in files and never reused.</summary>
public enum IndexKind
{
    /// <summary>An <see cref="Indexes.Exact.ExactIndex"/>.</summary>
    Exact = 1,

    /// <summary>A <see cref="Indexes.Graph.GraphIndex"/>.</summary>
    Graph = 2,

    /// <summary>An <see cref="Indexes.InvertedFile.InvertedFileIndex"/>.</summary>
    InvertedFile = 3,
}

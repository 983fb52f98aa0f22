namespace VectorKit.Persistence;

/// <summary>
/// A saved index file is damaged, truncated, hostile or of an unsupported format version: it cannot be loaded.
/// </summary>
/// <remarks>
/// The message says what is wrong and where: the part of the file (the header or a named section), the byte offset,
/// and the expected and found values. <see cref="Section"/> and <see cref="Offset"/> carry the same location for
/// programs. Loading never returns a partially loaded index: when this exception is thrown, nothing was kept.
/// </remarks>
public sealed class IndexFileException : IOException
{
    /// <summary>Creates an exception with a message.</summary>
    /// <param name="message">What is wrong with the file.</param>
    public IndexFileException(string message)
        : base(message)
    {
    }

    /// <summary>Creates an exception with a message and the exception that caused it.</summary>
    /// <param name="message">What is wrong with the file.</param>
    /// <param name="innerException">The cause, such as an <see cref="EndOfStreamException"/>.</param>
    public IndexFileException(string message, Exception innerException)
        : base(message, innerException)
    {
    }

    /// <summary>Creates an exception located in the file.</summary>
    /// <param name="message">What is wrong with the file, including the location.</param>
    /// <param name="section">The part of the file: <c>header</c> or a section name.</param>
    /// <param name="offset">The byte offset from the start of the index data, or -1 when unknown.</param>
    /// <param name="innerException">The cause, or <see langword="null"/>.</param>
    public IndexFileException(string message, string? section, long offset, Exception? innerException = null)
        : base(message, innerException!)
    {
        Section = section;
        Offset = offset;
    }

    /// <summary>The part of the file where the problem was found (<c>header</c> or a section name), when known.</summary>
    public string? Section { get; }

    /// <summary>The byte offset, from the start of the index data, where the problem was found; -1 when unknown.</summary>
    public long Offset { get; } = -1;

    /// <summary>The full path of the file that failed to load; <see langword="null"/> when the index was read from a stream.</summary>
    public string? FilePath { get; private set; }

    /// <inheritdoc/>
    public override string Message => FilePath is null ? base.Message : NameFile(base.Message, FilePath);

    /// <summary>Names the file this exception came from (once; the loader calls it before rethrowing).</summary>
    internal void AttachFilePath(string fullPath) => FilePath ??= fullPath;

    // Messages start "Index file ..."; the path goes right after those words.
    private static string NameFile(string message, string path)
        => message.StartsWith("Index file ", StringComparison.Ordinal)
            ? $"Index file '{path}' {message["Index file ".Length..]}"
            : $"Index file '{path}': {message}";
}

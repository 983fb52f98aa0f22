namespace VectorKit.IO;

/// <summary>A data file is malformed or truncated: its content does not follow the format it claims.</summary>
/// <remarks>
/// The message names the file format, what was expected and what was found, and the byte offset when known. When the
/// data was read from a path, the message names the file too and <see cref="FilePath"/> holds it.
/// </remarks>
public sealed class DataFormatException : IOException
{
    /// <summary>Creates an exception with a message.</summary>
    /// <param name="message">What is wrong with the data.</param>
    public DataFormatException(string message)
        : base(message)
    {
    }

    /// <summary>Creates an exception with a message and the exception that caused it.</summary>
    /// <param name="message">What is wrong with the data.</param>
    /// <param name="innerException">The cause, such as an <see cref="EndOfStreamException"/>.</param>
    public DataFormatException(string message, Exception innerException)
        : base(message, innerException)
    {
    }

    /// <summary>The full path of the file that failed to read; <see langword="null"/> when the data came from a stream or reader the caller opened.</summary>
    public string? FilePath { get; private set; }

    /// <inheritdoc/>
    public override string Message => FilePath is null ? base.Message : NameFile(base.Message, FilePath);

    /// <summary>Names the file this exception came from (once; the path-taking readers call it before rethrowing).</summary>
    internal void AttachFilePath(string fullPath) => FilePath ??= fullPath;

    // Messages start "{format}: ..."; the path goes before that colon ("npy file '/data/a.npy': ...").
    private static string NameFile(string message, string path)
    {
        if (message.Contains($"'{path}'", StringComparison.Ordinal))
        {
            return message;
        }

        int colon = message.IndexOf(": ", StringComparison.Ordinal);
        return colon > 0 && message.AsSpan(0, colon).IndexOfAny('\'', ':') < 0
            ? $"{message[..colon]} file '{path}'{message[colon..]}"
            : $"File '{path}': {message}";
    }
}

namespace VectorKit.IO;

/// <summary>A data file is malformed or truncated: its content does not follow the format it claims.</summary>
/// <remarks>The message names the file format, what was expected and what was found, and the byte offset when known.</remarks>
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
}

namespace VectorKit.VectorData;

/// <summary>A collection file in a store directory is damaged, truncated, or breaks a load limit.</summary>
/// <remarks>
/// Derives from <see cref="IOException"/>, like the core library's <c>IndexFileException</c>. The store reports it to
/// callers wrapped in a <see cref="Microsoft.Extensions.VectorData.VectorStoreException"/>, as the abstraction asks.
/// </remarks>
public sealed class CollectionFileException : IOException
{
    /// <summary>Creates the exception with a message describing what is wrong with the file.</summary>
    /// <param name="message">What is wrong, and where.</param>
    public CollectionFileException(string message)
        : base(message)
    {
    }

    /// <summary>Creates the exception with a message and the failure that revealed the problem.</summary>
    /// <param name="message">What is wrong, and where.</param>
    /// <param name="innerException">The failure that revealed it.</param>
    public CollectionFileException(string message, Exception innerException)
        : base(message, innerException)
    {
    }
}

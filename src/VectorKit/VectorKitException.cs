namespace VectorKit;

/// <summary>The base of the exceptions VectorKit raises for domain failures, such as a malformed data file.</summary>
/// <remarks>Invalid arguments raise the standard <see cref="ArgumentException"/> family instead.</remarks>
public class VectorKitException : Exception
{
    /// <summary>Creates an exception with a message.</summary>
    /// <param name="message">What went wrong.</param>
    public VectorKitException(string message)
        : base(message)
    {
    }

    /// <summary>Creates an exception with a message and the exception that caused it.</summary>
    /// <param name="message">What went wrong.</param>
    /// <param name="innerException">The cause.</param>
    public VectorKitException(string message, Exception innerException)
        : base(message, innerException)
    {
    }
}

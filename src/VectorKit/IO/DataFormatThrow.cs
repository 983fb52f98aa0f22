using System.Diagnostics.CodeAnalysis;

namespace VectorKit.IO;

/// <summary>Throw sites for the data-set readers and writers, kept out of the read loops so those stay small.</summary>
internal static class DataFormatThrow
{
    [DoesNotReturn]
    public static void Malformed(string format, string message)
        => throw new DataFormatException($"{format}: {message}.");

    [DoesNotReturn]
    public static void Malformed(string format, string message, long offset)
        => throw new DataFormatException($"{format}: {message} (at byte offset {offset}).");

    [DoesNotReturn]
    public static void Truncated(string format, string what, long offset, long expected, long found)
        => throw new DataFormatException(
            $"{format}: the data is truncated while reading {what} at byte offset {offset}: expected {expected} bytes, found {found}.");

    [DoesNotReturn]
    public static void RaggedRow(string format, long row, int expected, int found, long offset)
        => throw new DataFormatException(
            $"{format}: row {row} has dimension {found} but row 0 has dimension {expected}; every row must have the same dimension (at byte offset {offset}).");

    [DoesNotReturn]
    public static void ArgumentNull(string paramName)
        => throw new ArgumentNullException(paramName);

    [DoesNotReturn]
    public static void Argument(string paramName, string message)
        => throw new ArgumentException(message, paramName);

    [DoesNotReturn]
    public static void ArgumentOutOfRange(string paramName, object actual, string requirement)
        => throw new ArgumentOutOfRangeException(paramName, actual, $"{paramName} {requirement}; got {actual}.");

    [DoesNotReturn]
    public static void NotMultipleOfDimension(string paramName, int length, int dimension)
        => throw new ArgumentException(
            $"{paramName} has {length} values, which is not a whole number of rows of dimension {dimension}.", paramName);

    [DoesNotReturn]
    public static void InvalidOperation(string message)
        => throw new InvalidOperationException(message);

    [DoesNotReturn]
    public static void Disposed(object instance)
        => throw new ObjectDisposedException(instance.GetType().Name);
}

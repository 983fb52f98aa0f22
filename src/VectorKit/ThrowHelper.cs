using System.Diagnostics.CodeAnalysis;

namespace VectorKit;

/// <summary>Throw sites kept out of hot methods so those stay small enough to inline.</summary>
internal static class ThrowHelper
{
    [DoesNotReturn]
    public static void ThrowArgumentOutOfRange(string paramName, object actual, string requirement)
        => throw new ArgumentOutOfRangeException(paramName, actual, $"{paramName} {requirement}; got {actual}.");

    [DoesNotReturn]
    public static void ThrowReadOnlyIndex(string kind)
        => throw new NotSupportedException($"This {kind} reads a mapped index file in place and is read-only; "
            + "wrap it in a SegmentedIndex, or load the file with IndexFile.Load, to add, replace or remove items.");

    [DoesNotReturn]
    public static void ThrowArgument(string paramName, string message)
        => throw new ArgumentException(message, paramName);

    [DoesNotReturn]
    public static void ThrowDimensionMismatch(string paramName, int expected, int actual)
        => throw new ArgumentException($"{paramName} has {actual} components; the index dimension is {expected}.", paramName);

    [DoesNotReturn]
    public static void ThrowNotFinite(string paramName, int component, float value)
        => throw new ArgumentException($"{paramName} has a non-finite component: [{component}] = {value}. Every component must be a finite number.", paramName);

    [DoesNotReturn]
    public static void ThrowZeroVectorUnderCosine(string paramName)
        => throw new ArgumentException($"{paramName} is a zero vector, which has no direction: the cosine metric cannot compare it.", paramName);

    [DoesNotReturn]
    public static void ThrowDuplicateId(string paramName, long id)
        => throw new ArgumentException($"Id {id} is already in the index; ids must be unique.", paramName);

    [DoesNotReturn]
    public static void ThrowIdNotFound(long id)
        => throw new KeyNotFoundException($"Id {id} is not in the index.");

    [DoesNotReturn]
    public static void ThrowObjectDisposed(object instance)
        => throw new ObjectDisposedException(instance.GetType().Name);
}

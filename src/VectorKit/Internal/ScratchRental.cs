using System.Buffers;

namespace VectorKit.Internal;

/// <summary>
/// A scratch array from the shared pool for the length of a <c>using</c> scope: the one way the library borrows
/// temporary buffers (query copies, candidate heaps). A length of 0 rents nothing.
/// </summary>
/// <typeparam name="T">The element type.</typeparam>
internal ref struct ScratchRental<T>
{
    private T[]? _array;

    private ScratchRental(T[]? array, int length)
    {
        _array = array;
        Span = array is null ? default : array.AsSpan(0, length);
    }

    /// <summary>The rented elements, exactly the length asked for; contents are not cleared.</summary>
    public Span<T> Span { get; }

    public static ScratchRental<T> Rent(int length) => new(length == 0 ? null : ArrayPool<T>.Shared.Rent(length), length);

    public void Dispose()
    {
        if (_array is not null)
        {
            ArrayPool<T>.Shared.Return(_array);
            _array = null;
        }
    }
}

using System.Numerics;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using System.Security.Cryptography;

namespace VectorKit.Internal;

/// <summary>
/// Hashes 64-bit ids with SipHash-2-4 under a key drawn at random once per process, for every hash table fed by ids
/// that may come from a file or a caller's data.
/// </summary>
/// <remarks>
/// The default hash of a <see cref="long"/> folds its halves together (high XOR low), so ids such as
/// <c>(i &lt;&lt; 32) | i</c> all share one hash code and a table of them degrades to quadratic work. A keyed
/// pseudo-random function leaves an attacker who does not know the key no way to choose colliding ids.
/// Iteration order of a table using this comparer differs between processes: never let results depend on it.
/// </remarks>
internal sealed class KeyedIdComparer : IEqualityComparer<long>
{
    /// <summary>The comparer every id table uses, keyed once per process.</summary>
    public static readonly KeyedIdComparer Instance = WithRandomKey();

    private readonly ulong _k0;
    private readonly ulong _k1;

    internal KeyedIdComparer(ulong k0, ulong k1)
    {
        _k0 = k0;
        _k1 = k1;
    }

    public bool Equals(long x, long y) => x == y;

    public int GetHashCode(long id) => (int)Hash((ulong)id);

    /// <summary>SipHash-2-4 of the id's 8 little-endian bytes under this comparer's key.</summary>
    internal ulong Hash(ulong message)
    {
        ulong v0 = _k0 ^ 0x736f6d6570736575UL;
        ulong v1 = _k1 ^ 0x646f72616e646f6dUL;
        ulong v2 = _k0 ^ 0x6c7967656e657261UL;
        ulong v3 = _k1 ^ 0x7465646279746573UL;

        v3 ^= message;
        Round(ref v0, ref v1, ref v2, ref v3);
        Round(ref v0, ref v1, ref v2, ref v3);
        v0 ^= message;

        // The final block holds only the message length (8) in its top byte.
        const ulong last = 8UL << 56;
        v3 ^= last;
        Round(ref v0, ref v1, ref v2, ref v3);
        Round(ref v0, ref v1, ref v2, ref v3);
        v0 ^= last;

        v2 ^= 0xff;
        Round(ref v0, ref v1, ref v2, ref v3);
        Round(ref v0, ref v1, ref v2, ref v3);
        Round(ref v0, ref v1, ref v2, ref v3);
        Round(ref v0, ref v1, ref v2, ref v3);
        return v0 ^ v1 ^ v2 ^ v3;
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void Round(ref ulong v0, ref ulong v1, ref ulong v2, ref ulong v3)
    {
        v0 += v1;
        v1 = BitOperations.RotateLeft(v1, 13);
        v1 ^= v0;
        v0 = BitOperations.RotateLeft(v0, 32);
        v2 += v3;
        v3 = BitOperations.RotateLeft(v3, 16);
        v3 ^= v2;
        v0 += v3;
        v3 = BitOperations.RotateLeft(v3, 21);
        v3 ^= v0;
        v2 += v1;
        v1 = BitOperations.RotateLeft(v1, 17);
        v1 ^= v2;
        v2 = BitOperations.RotateLeft(v2, 32);
    }

    private static KeyedIdComparer WithRandomKey()
    {
        Span<ulong> key = stackalloc ulong[2];
        RandomNumberGenerator.Fill(MemoryMarshal.AsBytes(key));
        return new KeyedIdComparer(key[0], key[1]);
    }
}

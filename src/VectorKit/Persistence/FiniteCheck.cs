using System.Runtime.InteropServices;
using System.Runtime.Intrinsics;

namespace VectorKit.Persistence;

/// <summary>Finds NaN and infinite floats in loaded data: a float is non-finite exactly when its exponent bits are all ones.</summary>
internal static class FiniteCheck
{
    private const uint ExponentMask = 0x7F80_0000;

    /// <summary>The index of the first non-finite value, or -1.</summary>
    public static int IndexOfNonFinite(ReadOnlySpan<float> values)
    {
        ReadOnlySpan<uint> bits = MemoryMarshal.Cast<float, uint>(values);
        int i = 0;
        if (Vector256.IsHardwareAccelerated && bits.Length >= Vector256<uint>.Count)
        {
            // OR-accumulating a compare per block keeps the loop branch-light; the exact index is found afterwards.
            var mask = Vector256.Create(ExponentMask);
            int last = bits.Length - Vector256<uint>.Count;
            for (; i <= last; i += Vector256<uint>.Count)
            {
                Vector256<uint> v = Vector256.Create(bits.Slice(i, Vector256<uint>.Count));
                if (Vector256.EqualsAny(v & mask, mask))
                {
                    break;
                }
            }
        }

        for (; i < bits.Length; i++)
        {
            if ((bits[i] & ExponentMask) == ExponentMask)
            {
                return i;
            }
        }

        return -1;
    }
}

using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics.X86;

namespace VectorKit.Internal;

/// <summary>Cache hints for rows read in an order the hardware cannot predict (graph neighbours, re-scored candidates).</summary>
internal static class CachePrefetch
{
    /// <summary>Asks the cache for <paramref name="bytes"/> bytes from <paramref name="row"/> (one hint per 64-byte line); no effect where the hint is not available.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static unsafe void Lines(ref byte row, int bytes)
    {
        if (Sse.IsSupported)
        {
            // A hint never faults, so an address gone stale under the collector costs nothing but the hint.
            byte* start = (byte*)Unsafe.AsPointer(ref row);
            byte* end = start + bytes;
            for (byte* line = start; line < end; line += 64)
            {
                Sse.Prefetch0(line);
            }

            // A row that does not start on a line boundary ends on one more line.
            Sse.Prefetch0(end - 1);
        }
    }
}

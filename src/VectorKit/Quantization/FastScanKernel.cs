using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using System.Runtime.Intrinsics;
using System.Runtime.Intrinsics.X86;
using VectorKit.Distance.Kernels;

namespace VectorKit.Quantization;

/// <summary>
/// The four-bit fast scan (André, Kermarrec &amp; Le Scouarnec, VLDB 2015): codes of <see cref="FourBitQuantizer"/>
/// stored transposed in blocks of 32, lookup tables quantised to 8 bits and held in SIMD registers, one in-register
/// byte shuffle per sub-space looking up 16 or 32 codes at once, sums in saturating 16-bit lanes.
/// </summary>
/// <remarks>
/// <para><b>Block layout.</b> A block holds 32 entries of <c>B</c> code bytes in <c>B</c> columns of 32 bytes: column
/// <c>i</c> byte <c>j</c> is code byte <c>i</c> of entry <c>j</c> (low nibble sub-space <c>2i</c>, high nibble
/// <c>2i + 1</c>). A list of n entries takes <c>⌈n / 32⌉</c> blocks; slots past the last entry are ignored.</para>
/// <para><b>Tables.</b> <see cref="QuantizeTable"/> turns a float table (smaller is nearer) into levels
/// <c>round((t − min_m) / Δ)</c> with one step Δ for all sub-spaces and at most <see cref="MaxLevel"/> per entry, so a
/// sum of levels never exceeds 65,535 and the saturating adds never clip. The estimate of an entry is
/// <c>Σ min_m + Δ × Σ levels</c>, within <c>Δ / 2</c> per sub-space of the float table's sum.</para>
/// <para><b>Register image.</b> <see cref="PrepareImage"/> lays the 16 levels of each sub-space out twice (one copy per
/// 128-bit half, since byte shuffles do not cross halves) in the order the chosen width loads them.</para>
/// </remarks>
internal static class FastScanKernel
{
    /// <summary>Entries per block.</summary>
    public const int BlockSize = 32;

    /// <summary>Bytes of register image per code byte (two sub-spaces, each 16 levels twice).</summary>
    public const int ImageBytesPerCodeByte = 64;

    /// <summary>The largest level of <paramref name="subspaces"/> sub-spaces: 255, or less so that a sum fits 16 bits.</summary>
    public static int MaxLevel(int subspaces) => Math.Min(255, ushort.MaxValue / subspaces);

    /// <summary>Bytes a list of <paramref name="entries"/> takes: whole blocks.</summary>
    public static long ListBytes(long entries, int codeBytes) => (entries + BlockSize - 1) / BlockSize * BlockSize * codeBytes;

    /// <summary>Writes the packed code of entry <paramref name="position"/> into its block column slots.</summary>
    public static void Put(Span<byte> blocks, int codeBytes, int position, ReadOnlySpan<byte> code)
    {
        int start = (position / BlockSize * BlockSize * codeBytes) + (position % BlockSize);
        for (int i = 0; i < codeBytes; i++)
        {
            blocks[start + (i * BlockSize)] = code[i];
        }
    }

    /// <summary>Reads the packed code of entry <paramref name="position"/>.</summary>
    public static void Get(ReadOnlySpan<byte> blocks, int codeBytes, int position, Span<byte> code)
    {
        int start = (position / BlockSize * BlockSize * codeBytes) + (position % BlockSize);
        for (int i = 0; i < codeBytes; i++)
        {
            code[i] = blocks[start + (i * BlockSize)];
        }
    }

    /// <summary>
    /// Quantises a float table (<paramref name="subspaces"/> × 16 values) to 8-bit levels; returns the bias
    /// <c>Σ min_m</c> and the step Δ (1 when every sub-space is flat).
    /// </summary>
    public static (float Bias, float Step) QuantizeTable(ReadOnlySpan<float> table, int subspaces, Span<byte> levels)
    {
        const int W = FourBitQuantizer.CodewordsPerSubspace;
        ref float start = ref MemoryMarshal.GetReference(table);
        float bias = 0;
        float range = 0;
        for (int m = 0; m < subspaces; m++)
        {
            (float low, float high) = Bounds(ref Unsafe.Add(ref start, m * W));
            bias += low;
            range = Math.Max(range, high - low);
        }

        int top = MaxLevel(subspaces);
        float step = range > 0 ? range / top : 1f;
        Vector128<float> inverse = Vector128.Create(1f / step);
        Vector128<float> ceiling = Vector128.Create((float)top);
        ref byte output = ref MemoryMarshal.GetReference(levels);
        for (int m = 0; m < subspaces; m++)
        {
            // A row is 16 floats, four 128-bit lanes: shifted by its minimum, scaled, rounded to even, narrowed to bytes.
            ref float row = ref Unsafe.Add(ref start, m * W);
            Vector128<float> low = Vector128.Create(Bounds(ref row).Low);
            Vector128<int> l0 = Level(Vector128.LoadUnsafe(ref row), low, inverse, ceiling);
            Vector128<int> l1 = Level(Vector128.LoadUnsafe(ref row, 4), low, inverse, ceiling);
            Vector128<int> l2 = Level(Vector128.LoadUnsafe(ref row, 8), low, inverse, ceiling);
            Vector128<int> l3 = Level(Vector128.LoadUnsafe(ref row, 12), low, inverse, ceiling);
            Vector128<ushort> first = Vector128.Narrow(l0.AsUInt32(), l1.AsUInt32());
            Vector128<ushort> second = Vector128.Narrow(l2.AsUInt32(), l3.AsUInt32());
            Vector128.Narrow(first, second).StoreUnsafe(ref output, (nuint)(m * W));
        }

        return (bias, step);
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static (float Low, float High) Bounds(ref float row)
    {
        Vector128<float> a = Vector128.LoadUnsafe(ref row), b = Vector128.LoadUnsafe(ref row, 4);
        Vector128<float> c = Vector128.LoadUnsafe(ref row, 8), d = Vector128.LoadUnsafe(ref row, 12);
        Vector128<float> low = Vector128.Min(Vector128.Min(a, b), Vector128.Min(c, d));
        Vector128<float> high = Vector128.Max(Vector128.Max(a, b), Vector128.Max(c, d));
        return (Math.Min(Math.Min(low[0], low[1]), Math.Min(low[2], low[3])), Math.Max(Math.Max(high[0], high[1]), Math.Max(high[2], high[3])));
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static Vector128<int> Level(Vector128<float> values, Vector128<float> low, Vector128<float> inverse, Vector128<float> ceiling)
        => Vector128.ConvertToInt32(Vector128.Min(Vector128.Max(Vector128.Round((values - low) * inverse), Vector128<float>.Zero), ceiling));

    /// <summary>
    /// Lays the levels (<c>2 × codeBytes</c> sub-spaces × 16) out for <paramref name="path"/>: per code byte <c>i</c>,
    /// 32 bytes for sub-space <c>2i</c> then 32 for <c>2i + 1</c>; the 512-bit path takes code bytes in pairs
    /// (<c>2i, 2i + 2, 2i + 1, 2i + 3</c>) so one register covers two columns. <paramref name="image"/> holds
    /// <c>codeBytes × 64</c> bytes.
    /// </summary>
    public static void PrepareImage(KernelPath path, ReadOnlySpan<byte> levels, int codeBytes, Span<byte> image)
    {
        const int W = FourBitQuantizer.CodewordsPerSubspace;
        bool pairs = path == KernelPath.Vector512;
        for (int i = 0; i < codeBytes; i++)
        {
            for (int half = 0; half < 2; half++)
            {
                int m = (2 * i) + half;
                int at;
                if (pairs && (i & ~1) + 1 < codeBytes)
                {
                    // Column pair (p, p + 1): [2p, 2p + 2, 2p + 1, 2p + 3], 32 bytes each.
                    int p = i & ~1;
                    at = (p * ImageBytesPerCodeByte) + (half * 64) + ((i - p) * 32);
                }
                else
                {
                    at = (i * ImageBytesPerCodeByte) + (half * 32);
                }

                levels.Slice(m * W, W).CopyTo(image.Slice(at, W));
                levels.Slice(m * W, W).CopyTo(image.Slice(at + W, W));
            }
        }
    }

    /// <summary>
    /// The level sums of <paramref name="blockCount"/> consecutive blocks (32 per block, padding slots included) into
    /// <paramref name="sums"/>, at <paramref name="path"/> (falling back to scalar code where the byte shuffle of that
    /// width is missing). <paramref name="image"/> comes from <see cref="PrepareImage"/> for the same path.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    public static void Scan(KernelPath path, ref byte image, ref byte blocks, int codeBytes, int blockCount, ref ushort sums)
    {
        if (path == KernelPath.Vector512 && Avx512BW.IsSupported)
        {
            Scan512(ref image, ref blocks, codeBytes, blockCount, ref sums);
        }
        else if (path >= KernelPath.Vector256 && Avx2.IsSupported)
        {
            Scan256(ref image, ref blocks, codeBytes, blockCount, ref sums);
        }
        else if (path >= KernelPath.Vector128 && Ssse3.IsSupported)
        {
            Scan128(ref image, ref blocks, codeBytes, blockCount, ref sums);
        }
        else
        {
            ScanScalar(ref image, ref blocks, codeBytes, blockCount, ref sums);
        }
    }

    /// <summary>
    /// A mask of the block of 32 sums at <paramref name="sums"/> that are at most <paramref name="limit"/> (bit j for sum
    /// j), so a scan visits only the entries that can beat its bound instead of testing all of them one by one.
    /// </summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static uint AtMost(KernelPath path, ref ushort sums, ushort limit)
    {
        if (path == KernelPath.Vector512 && Vector512.IsHardwareAccelerated)
        {
            return (uint)Vector512.LessThanOrEqual(Vector512.LoadUnsafe(ref sums), Vector512.Create(limit)).ExtractMostSignificantBits();
        }

        if (path >= KernelPath.Vector256 && Vector256.IsHardwareAccelerated)
        {
            Vector256<ushort> bound = Vector256.Create(limit);
            return Vector256.LessThanOrEqual(Vector256.LoadUnsafe(ref sums), bound).ExtractMostSignificantBits()
                | (Vector256.LessThanOrEqual(Vector256.LoadUnsafe(ref sums, 16), bound).ExtractMostSignificantBits() << 16);
        }

        if (path >= KernelPath.Vector128 && Vector128.IsHardwareAccelerated)
        {
            Vector128<ushort> bound = Vector128.Create(limit);
            uint mask = 0;
            for (int i = 0; i < BlockSize; i += 8)
            {
                mask |= Vector128.LessThanOrEqual(Vector128.LoadUnsafe(ref sums, (nuint)i), bound).ExtractMostSignificantBits() << i;
            }

            return mask;
        }

        uint bits = 0;
        for (int i = 0; i < BlockSize; i++)
        {
            bits |= (Unsafe.Add(ref sums, i) <= limit ? 1u : 0u) << i;
        }

        return bits;
    }

    /// <summary>
    /// The largest level sum whose estimate <c>start + step × sum</c>, computed as the scan computes it, is at most
    /// <paramref name="bound"/> (estimates grow with the sum, so exactly the sums up to it pass); −1 when none does.
    /// </summary>
    public static int SumLimit(float bound, float start, float step)
    {
        if (!(start <= bound))
        {
            return -1;
        }

        if (!(step > 0))
        {
            // Estimates do not grow with the sum: every one is at most start.
            return ushort.MaxValue;
        }

        float quotient = (bound - start) / step;
        if (!(quotient < ushort.MaxValue))
        {
            return ushort.MaxValue;
        }

        // The quotient is usually within a level of the answer; settle it with the scan's own arithmetic, by bisection
        // when rounding moved it further (a step far below the start's precision).
        int guess = (int)quotient;
        int low = Passes(guess) ? guess : -1, high = Passes(guess) ? ushort.MaxValue + 1 : guess;
        if (low >= 0 && !Passes(guess + 1))
        {
            return guess;
        }

        if (low < 0 && guess > 0 && Passes(guess - 1))
        {
            return guess - 1;
        }

        // Invariant: low passes (or is −1), high fails (or is past the largest sum).
        low = low >= 0 ? guess + 1 : low;
        while (high - low > 1)
        {
            int middle = (low + high) >>> 1;
            if (middle >= 0 && Passes(middle))
            {
                low = middle;
            }
            else
            {
                high = middle;
            }
        }

        return Math.Min(low, ushort.MaxValue);

        bool Passes(int sum) => start + (step * sum) <= bound;
    }

    /// <summary>The path <see cref="Scan"/> really runs for a requested one (tests assert each path is taken).</summary>
    public static KernelPath Effective(KernelPath path)
        => path == KernelPath.Vector512 && Avx512BW.IsSupported ? KernelPath.Vector512
        : path >= KernelPath.Vector256 && Avx2.IsSupported ? KernelPath.Vector256
        : path >= KernelPath.Vector128 && Ssse3.IsSupported ? KernelPath.Vector128
        : KernelPath.Scalar;

    private static void ScanScalar(ref byte image, ref byte blocks, int codeBytes, int blockCount, ref ushort sums)
    {
        nint columnBytes = BlockSize;
        for (int b = 0; b < blockCount; b++)
        {
            ref byte block = ref Unsafe.Add(ref blocks, (nint)b * BlockSize * codeBytes);
            for (int j = 0; j < BlockSize; j++)
            {
                int sum = 0;
                for (int i = 0; i < codeBytes; i++)
                {
                    int code = Unsafe.Add(ref block, (i * columnBytes) + j);
                    ref byte tables = ref Unsafe.Add(ref image, i * ImageBytesPerCodeByte);
                    sum += Unsafe.Add(ref tables, code & 0xF) + Unsafe.Add(ref tables, 32 + (code >> 4));
                }

                // Every level is non-negative, so saturating after the last add equals saturating at each.
                Unsafe.Add(ref sums, (b * BlockSize) + j) = (ushort)Math.Min(sum, ushort.MaxValue);
            }
        }
    }

    // Two 16-entry halves per block; u16 lanes hold even entries in the low byte's sum and odd ones in the high byte's.
    private static void Scan128(ref byte image, ref byte blocks, int codeBytes, int blockCount, ref ushort sums)
    {
        Vector128<byte> nibble = Vector128.Create((byte)0x0F);
        Vector128<ushort> lowByte = Vector128.Create((ushort)0x00FF);
        for (int b = 0; b < blockCount; b++)
        {
            ref byte block = ref Unsafe.Add(ref blocks, (nint)b * BlockSize * codeBytes);
            for (int h = 0; h < 2; h++)
            {
                Vector128<ushort> even = Vector128<ushort>.Zero, odd = Vector128<ushort>.Zero;
                for (int i = 0; i < codeBytes; i++)
                {
                    Vector128<byte> code = Vector128.LoadUnsafe(ref block, (nuint)((i * BlockSize) + (h * 16)));
                    Vector128<byte> low = code & nibble;
                    Vector128<byte> high = Vector128.ShiftRightLogical(code.AsUInt16(), 4).AsByte() & nibble;
                    ref byte tables = ref Unsafe.Add(ref image, i * ImageBytesPerCodeByte);
                    Vector128<ushort> r0 = Ssse3.Shuffle(Vector128.LoadUnsafe(ref tables), low).AsUInt16();
                    Vector128<ushort> r1 = Ssse3.Shuffle(Vector128.LoadUnsafe(ref tables, 32), high).AsUInt16();
                    even = Sse2.AddSaturate(even, r0 & lowByte);
                    odd = Sse2.AddSaturate(odd, Vector128.ShiftRightLogical(r0, 8));
                    even = Sse2.AddSaturate(even, r1 & lowByte);
                    odd = Sse2.AddSaturate(odd, Vector128.ShiftRightLogical(r1, 8));
                }

                ref ushort target = ref Unsafe.Add(ref sums, (b * BlockSize) + (h * 16));
                Sse2.UnpackLow(even, odd).StoreUnsafe(ref target);
                Sse2.UnpackHigh(even, odd).StoreUnsafe(ref target, 8);
            }
        }
    }

    // One 32-entry block per register: the 128-bit halves hold entries 0–15 and 16–31, each with its copy of the table.
    private static void Scan256(ref byte image, ref byte blocks, int codeBytes, int blockCount, ref ushort sums)
    {
        for (int b = 0; b < blockCount; b++)
        {
            ref byte block = ref Unsafe.Add(ref blocks, (nint)b * BlockSize * codeBytes);
            Vector256<ushort> even = Vector256<ushort>.Zero, odd = Vector256<ushort>.Zero;
            for (int i = 0; i < codeBytes; i++)
            {
                Accumulate256(ref Unsafe.Add(ref image, i * ImageBytesPerCodeByte), Vector256.LoadUnsafe(ref block, (nuint)(i * BlockSize)), ref even, ref odd);
            }

            Store256(even, odd, ref Unsafe.Add(ref sums, b * BlockSize));
        }
    }

    // Two columns per register: halves 0–1 are column i (entries 0–31), halves 2–3 column i + 1; folded at the end.
    private static void Scan512(ref byte image, ref byte blocks, int codeBytes, int blockCount, ref ushort sums)
    {
        Vector512<byte> nibble = Vector512.Create((byte)0x0F);
        Vector512<ushort> lowByte = Vector512.Create((ushort)0x00FF);
        int paired = codeBytes & ~1;
        for (int b = 0; b < blockCount; b++)
        {
            ref byte block = ref Unsafe.Add(ref blocks, (nint)b * BlockSize * codeBytes);
            Vector512<ushort> even = Vector512<ushort>.Zero, odd = Vector512<ushort>.Zero;
            for (int i = 0; i < paired; i += 2)
            {
                Vector512<byte> code = Vector512.LoadUnsafe(ref block, (nuint)(i * BlockSize));
                Vector512<byte> low = code & nibble;
                Vector512<byte> high = Vector512.ShiftRightLogical(code.AsUInt16(), 4).AsByte() & nibble;
                ref byte tables = ref Unsafe.Add(ref image, i * ImageBytesPerCodeByte);
                Vector512<ushort> r0 = Avx512BW.Shuffle(Vector512.LoadUnsafe(ref tables), low).AsUInt16();
                Vector512<ushort> r1 = Avx512BW.Shuffle(Vector512.LoadUnsafe(ref tables, 64), high).AsUInt16();
                even = Avx512BW.AddSaturate(even, r0 & lowByte);
                odd = Avx512BW.AddSaturate(odd, Vector512.ShiftRightLogical(r0, 8));
                even = Avx512BW.AddSaturate(even, r1 & lowByte);
                odd = Avx512BW.AddSaturate(odd, Vector512.ShiftRightLogical(r1, 8));
            }

            Vector256<ushort> even256 = Avx2.AddSaturate(even.GetLower(), even.GetUpper());
            Vector256<ushort> odd256 = Avx2.AddSaturate(odd.GetLower(), odd.GetUpper());
            if (paired < codeBytes)
            {
                Accumulate256(ref Unsafe.Add(ref image, paired * ImageBytesPerCodeByte), Vector256.LoadUnsafe(ref block, (nuint)(paired * BlockSize)), ref even256, ref odd256);
            }

            Store256(even256, odd256, ref Unsafe.Add(ref sums, b * BlockSize));
        }
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void Accumulate256(ref byte tables, Vector256<byte> code, ref Vector256<ushort> even, ref Vector256<ushort> odd)
    {
        Vector256<byte> nibble = Vector256.Create((byte)0x0F);
        Vector256<ushort> lowByte = Vector256.Create((ushort)0x00FF);
        Vector256<byte> low = code & nibble;
        Vector256<byte> high = Vector256.ShiftRightLogical(code.AsUInt16(), 4).AsByte() & nibble;
        Vector256<ushort> r0 = Avx2.Shuffle(Vector256.LoadUnsafe(ref tables), low).AsUInt16();
        Vector256<ushort> r1 = Avx2.Shuffle(Vector256.LoadUnsafe(ref tables, 32), high).AsUInt16();
        even = Avx2.AddSaturate(even, r0 & lowByte);
        odd = Avx2.AddSaturate(odd, Vector256.ShiftRightLogical(r0, 8));
        even = Avx2.AddSaturate(even, r1 & lowByte);
        odd = Avx2.AddSaturate(odd, Vector256.ShiftRightLogical(r1, 8));
    }

    // Interleaves even and odd entries back into order: per 128-bit half, unpack gives entries 0–7 and 8–15 of that half.
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void Store256(Vector256<ushort> even, Vector256<ushort> odd, ref ushort target)
    {
        Vector256<ushort> first = Avx2.UnpackLow(even, odd);
        Vector256<ushort> second = Avx2.UnpackHigh(even, odd);
        Avx2.Permute2x128(first, second, 0x20).StoreUnsafe(ref target);
        Avx2.Permute2x128(first, second, 0x31).StoreUnsafe(ref target, 16);
    }
}

using System.Diagnostics;
using System.Runtime.CompilerServices;

namespace VectorKit.Distance.Kernels;

/// <summary>
/// Dot products of a block of queries against a block of stored rows at matrix-multiply speed: the queries are packed
/// once into component-major panels of a few lanes, and a register tile of rows × lanes of queries sweeps them.
/// </summary>
/// <remarks>
/// <para>On 128- and 256-bit hardware (16 registers) the tile is 6 rows × 2 lanes: per component, two panel loads and six
/// broadcasts of row components feed 12 multiply-adds into 12 accumulators. AVX-512 has 32 registers, so the tile is
/// 8 rows × 3 lanes: 3 loads and 8 broadcasts feed 24 multiply-adds, enough to keep both FMA units busy past the
/// register copies the JIT adds. No horizontal sums; the rows are read where they are stored (row-major), so only the
/// small query block is ever repacked.</para>
/// <para>Components are summed in blocks of <see cref="ComponentBlock"/>: each block in a fresh chain, whose query slice
/// (<see cref="ComponentBlock"/> × 2 lanes) stays in L1 while every row group of the caller's tile passes, then added
/// to the output. The order depends on the dimension only, never on alignment; <see cref="ChainLength"/> bounds the
/// roundings one output goes through.</para>
/// </remarks>
internal static class PanelKernel
{
    /// <summary>A row count every path's row group divides (6 and 8): callers' row tiles are multiples of it.</summary>
    public const int RowMultiple = 24;

    /// <summary>Components summed in one register chain before being added to the output.</summary>
    public const int ComponentBlock = 128;

    /// <summary>Rows per register tile on <paramref name="path"/>.</summary>
    public static int RowGroup(KernelPath path) => path == KernelPath.Vector512 ? 8 : 6;

    /// <summary>Queries per packed panel on <paramref name="path"/>: the tile's lanes.</summary>
    public static int PanelWidth(KernelPath path) => (path == KernelPath.Vector512 ? 3 : 2) * path switch
    {
        KernelPath.Vector512 => Lane512.Count,
        KernelPath.Vector256 => Lane256.Count,
        KernelPath.Vector128 => Lane128.Count,
        _ => LaneScalar.Count,
    };

    /// <summary><paramref name="queryCount"/> rounded up to whole panels: the output's used columns.</summary>
    public static int PaddedQueries(KernelPath path, int queryCount) => RoundUp(queryCount, PanelWidth(path));

    /// <summary><paramref name="rowCount"/> rounded up to whole row groups: the output rows <see cref="Compute"/> writes.</summary>
    public static int PaddedRows(KernelPath path, int rowCount) => RoundUp(rowCount, RowGroup(path));

    /// <summary>Floats the packed form of <paramref name="queryCount"/> queries takes.</summary>
    public static int PackedLength(KernelPath path, int queryCount, int dimension) => PaddedQueries(path, queryCount) * dimension;

    /// <summary>The most roundings a product passes through into one output: one block's chain, then one addition per block.</summary>
    public static int ChainLength(int dimension) => Math.Min(dimension, ComponentBlock) + ((dimension + ComponentBlock - 1) / ComponentBlock);

    /// <summary>
    /// Packs row-major queries into panels: panel <c>p</c> holds queries <c>[p·P, p·P + P)</c> component by component
    /// (<c>packed[p·P·d + k·P + j]</c> = component <c>k</c> of query <c>p·P + j</c>); missing queries are zeros.
    /// </summary>
    public static void Pack(KernelPath path, ReadOnlySpan<float> queries, int queryCount, int dimension, Span<float> packed)
    {
        int width = PanelWidth(path);
        int padded = PaddedQueries(path, queryCount);
        Debug.Assert(queries.Length >= queryCount * dimension && packed.Length >= padded * dimension);
        for (int p = 0; p < padded; p += width)
        {
            Span<float> panel = packed.Slice(p * dimension, width * dimension);
            for (int j = 0; j < width; j++)
            {
                int q = p + j;
                if (q < queryCount)
                {
                    ReadOnlySpan<float> query = queries.Slice(q * dimension, dimension);
                    for (int k = 0; k < dimension; k++)
                    {
                        panel[(k * width) + j] = query[k];
                    }
                }
                else
                {
                    for (int k = 0; k < dimension; k++)
                    {
                        panel[(k * width) + j] = 0f;
                    }
                }
            }
        }
    }

    /// <summary>
    /// <c>output[r × outputStride + q] = Σₖ row r[k] · query q[k]</c> for every row and every packed query column.
    /// </summary>
    /// <remarks>
    /// Writes <see cref="PaddedRows"/> rows of <see cref="PaddedQueries"/> columns: the extra rows repeat the last row
    /// and the extra columns are zero queries; callers ignore both. <paramref name="path"/> must be the one the
    /// queries were packed for.
    /// </remarks>
    public static void Compute(KernelPath path, ref float packed, int queryCount, ref float rows, int rowCount, int dimension, ref float output, int outputStride)
    {
        Debug.Assert(dimension > 0 && rowCount > 0 && outputStride >= PaddedQueries(path, queryCount));
        switch (path)
        {
            case KernelPath.Vector512: Compute<Lane512>(ref packed, queryCount, ref rows, rowCount, dimension, ref output, outputStride); break;
            case KernelPath.Vector256: Compute<Lane256>(ref packed, queryCount, ref rows, rowCount, dimension, ref output, outputStride); break;
            case KernelPath.Vector128: Compute<Lane128>(ref packed, queryCount, ref rows, rowCount, dimension, ref output, outputStride); break;
            default: Compute<LaneScalar>(ref packed, queryCount, ref rows, rowCount, dimension, ref output, outputStride); break;
        }
    }

    private static int RoundUp(int value, int multiple) => (value + multiple - 1) / multiple * multiple;

    // Never inlined, like the other kernel bodies: inlined into a large caller the lane structs stop living in registers.
    [MethodImpl(MethodImplOptions.NoInlining | MethodImplOptions.AggressiveOptimization)]
    private static void Compute<TLane>(ref float packed, int queryCount, ref float rows, int rowCount, int dimension, ref float output, int outputStride)
        where TLane : struct, IVectorLane<TLane>
    {
        nint d = dimension;
        // JIT-time constants per lane type: the 8 × 3 tile on 512-bit lanes, 6 × 2 otherwise.
        bool wide = TLane.Count == 16;
        int rowGroup = wide ? 8 : 6;
        int width = (wide ? 3 : 2) * TLane.Count;
        int panels = (queryCount + width - 1) / width;
        int lastRow = rowCount - 1;
        for (int block = 0; block < dimension; block += ComponentBlock)
        {
            int length = Math.Min(ComponentBlock, dimension - block);
            bool first = block == 0;
            for (int p = 0; p < panels; p++)
            {
                ref float panel = ref Unsafe.Add(ref packed, ((nint)p * width * d) + ((nint)block * width));
                ref float columns = ref Unsafe.Add(ref output, (nint)p * width);
                if (wide)
                {
                    for (int r = 0; r < rowCount; r += rowGroup)
                    {
                        ref float r0 = ref Unsafe.Add(ref rows, ((nint)r * d) + block);
                        ref float r1 = ref Unsafe.Add(ref rows, ((nint)Math.Min(r + 1, lastRow) * d) + block);
                        ref float r2 = ref Unsafe.Add(ref rows, ((nint)Math.Min(r + 2, lastRow) * d) + block);
                        ref float r3 = ref Unsafe.Add(ref rows, ((nint)Math.Min(r + 3, lastRow) * d) + block);
                        ref float r4 = ref Unsafe.Add(ref rows, ((nint)Math.Min(r + 4, lastRow) * d) + block);
                        ref float r5 = ref Unsafe.Add(ref rows, ((nint)Math.Min(r + 5, lastRow) * d) + block);
                        ref float r6 = ref Unsafe.Add(ref rows, ((nint)Math.Min(r + 6, lastRow) * d) + block);
                        ref float r7 = ref Unsafe.Add(ref rows, ((nint)Math.Min(r + 7, lastRow) * d) + block);
                        WideTile<TLane>(ref panel, ref r0, ref r1, ref r2, ref r3, ref r4, ref r5, ref r6, ref r7, length, ref Unsafe.Add(ref columns, (nint)r * outputStride), outputStride, first);
                    }

                    continue;
                }

                for (int r = 0; r < rowCount; r += rowGroup)
                {
                    // Past the last row, the group repeats it: the tile stays branch-free and the caller ignores those outputs.
                    ref float r0 = ref Unsafe.Add(ref rows, ((nint)r * d) + block);
                    ref float r1 = ref Unsafe.Add(ref rows, ((nint)Math.Min(r + 1, lastRow) * d) + block);
                    ref float r2 = ref Unsafe.Add(ref rows, ((nint)Math.Min(r + 2, lastRow) * d) + block);
                    ref float r3 = ref Unsafe.Add(ref rows, ((nint)Math.Min(r + 3, lastRow) * d) + block);
                    ref float r4 = ref Unsafe.Add(ref rows, ((nint)Math.Min(r + 4, lastRow) * d) + block);
                    ref float r5 = ref Unsafe.Add(ref rows, ((nint)Math.Min(r + 5, lastRow) * d) + block);
                    Tile<TLane>(ref panel, ref r0, ref r1, ref r2, ref r3, ref r4, ref r5, length, ref Unsafe.Add(ref columns, (nint)r * outputStride), outputStride, first);
                }
            }
        }
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void Tile<TLane>(ref float panel, ref float r0, ref float r1, ref float r2, ref float r3, ref float r4, ref float r5, int length, ref float output, nint stride, bool first)
        where TLane : struct, IVectorLane<TLane>
    {
        // c{row}{lane}: row of the group × first or second lane of query columns.
        TLane c00 = TLane.Zero, c01 = TLane.Zero, c10 = TLane.Zero, c11 = TLane.Zero, c20 = TLane.Zero, c21 = TLane.Zero;
        TLane c30 = TLane.Zero, c31 = TLane.Zero, c40 = TLane.Zero, c41 = TLane.Zero, c50 = TLane.Zero, c51 = TLane.Zero;
        nint w = TLane.Count;
        ref float b = ref panel;
        for (nint k = 0; k < length; k++)
        {
            TLane b0 = TLane.Load(ref b, 0), b1 = TLane.Load(ref b, w);
            b = ref Unsafe.Add(ref b, 2 * w);
            TLane a = TLane.Broadcast(Unsafe.Add(ref r0, k));
            c00 = TLane.MultiplyAdd(a, b0, c00); c01 = TLane.MultiplyAdd(a, b1, c01);
            a = TLane.Broadcast(Unsafe.Add(ref r1, k));
            c10 = TLane.MultiplyAdd(a, b0, c10); c11 = TLane.MultiplyAdd(a, b1, c11);
            a = TLane.Broadcast(Unsafe.Add(ref r2, k));
            c20 = TLane.MultiplyAdd(a, b0, c20); c21 = TLane.MultiplyAdd(a, b1, c21);
            a = TLane.Broadcast(Unsafe.Add(ref r3, k));
            c30 = TLane.MultiplyAdd(a, b0, c30); c31 = TLane.MultiplyAdd(a, b1, c31);
            a = TLane.Broadcast(Unsafe.Add(ref r4, k));
            c40 = TLane.MultiplyAdd(a, b0, c40); c41 = TLane.MultiplyAdd(a, b1, c41);
            a = TLane.Broadcast(Unsafe.Add(ref r5, k));
            c50 = TLane.MultiplyAdd(a, b0, c50); c51 = TLane.MultiplyAdd(a, b1, c51);
        }

        Put(c00, c01, ref output, w, first);
        Put(c10, c11, ref Unsafe.Add(ref output, stride), w, first);
        Put(c20, c21, ref Unsafe.Add(ref output, 2 * stride), w, first);
        Put(c30, c31, ref Unsafe.Add(ref output, 3 * stride), w, first);
        Put(c40, c41, ref Unsafe.Add(ref output, 4 * stride), w, first);
        Put(c50, c51, ref Unsafe.Add(ref output, 5 * stride), w, first);
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void WideTile<TLane>(ref float panel, ref float r0, ref float r1, ref float r2, ref float r3, ref float r4, ref float r5, ref float r6, ref float r7, int length, ref float output, nint stride, bool first)
        where TLane : struct, IVectorLane<TLane>
    {
        TLane c00 = TLane.Zero, c01 = TLane.Zero, c02 = TLane.Zero, c10 = TLane.Zero, c11 = TLane.Zero, c12 = TLane.Zero;
        TLane c20 = TLane.Zero, c21 = TLane.Zero, c22 = TLane.Zero, c30 = TLane.Zero, c31 = TLane.Zero, c32 = TLane.Zero;
        TLane c40 = TLane.Zero, c41 = TLane.Zero, c42 = TLane.Zero, c50 = TLane.Zero, c51 = TLane.Zero, c52 = TLane.Zero;
        TLane c60 = TLane.Zero, c61 = TLane.Zero, c62 = TLane.Zero, c70 = TLane.Zero, c71 = TLane.Zero, c72 = TLane.Zero;
        nint w = TLane.Count;
        ref float b = ref panel;
        for (nint k = 0; k < length; k++)
        {
            TLane b0 = TLane.Load(ref b, 0), b1 = TLane.Load(ref b, w), b2 = TLane.Load(ref b, 2 * w);
            b = ref Unsafe.Add(ref b, 3 * w);
            TLane a = TLane.Broadcast(Unsafe.Add(ref r0, k));
            c00 = TLane.MultiplyAdd(a, b0, c00); c01 = TLane.MultiplyAdd(a, b1, c01); c02 = TLane.MultiplyAdd(a, b2, c02);
            a = TLane.Broadcast(Unsafe.Add(ref r1, k));
            c10 = TLane.MultiplyAdd(a, b0, c10); c11 = TLane.MultiplyAdd(a, b1, c11); c12 = TLane.MultiplyAdd(a, b2, c12);
            a = TLane.Broadcast(Unsafe.Add(ref r2, k));
            c20 = TLane.MultiplyAdd(a, b0, c20); c21 = TLane.MultiplyAdd(a, b1, c21); c22 = TLane.MultiplyAdd(a, b2, c22);
            a = TLane.Broadcast(Unsafe.Add(ref r3, k));
            c30 = TLane.MultiplyAdd(a, b0, c30); c31 = TLane.MultiplyAdd(a, b1, c31); c32 = TLane.MultiplyAdd(a, b2, c32);
            a = TLane.Broadcast(Unsafe.Add(ref r4, k));
            c40 = TLane.MultiplyAdd(a, b0, c40); c41 = TLane.MultiplyAdd(a, b1, c41); c42 = TLane.MultiplyAdd(a, b2, c42);
            a = TLane.Broadcast(Unsafe.Add(ref r5, k));
            c50 = TLane.MultiplyAdd(a, b0, c50); c51 = TLane.MultiplyAdd(a, b1, c51); c52 = TLane.MultiplyAdd(a, b2, c52);
            a = TLane.Broadcast(Unsafe.Add(ref r6, k));
            c60 = TLane.MultiplyAdd(a, b0, c60); c61 = TLane.MultiplyAdd(a, b1, c61); c62 = TLane.MultiplyAdd(a, b2, c62);
            a = TLane.Broadcast(Unsafe.Add(ref r7, k));
            c70 = TLane.MultiplyAdd(a, b0, c70); c71 = TLane.MultiplyAdd(a, b1, c71); c72 = TLane.MultiplyAdd(a, b2, c72);
        }

        Put(c00, c01, c02, ref output, w, first);
        Put(c10, c11, c12, ref Unsafe.Add(ref output, stride), w, first);
        Put(c20, c21, c22, ref Unsafe.Add(ref output, 2 * stride), w, first);
        Put(c30, c31, c32, ref Unsafe.Add(ref output, 3 * stride), w, first);
        Put(c40, c41, c42, ref Unsafe.Add(ref output, 4 * stride), w, first);
        Put(c50, c51, c52, ref Unsafe.Add(ref output, 5 * stride), w, first);
        Put(c60, c61, c62, ref Unsafe.Add(ref output, 6 * stride), w, first);
        Put(c70, c71, c72, ref Unsafe.Add(ref output, 7 * stride), w, first);
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void Put<TLane>(TLane low, TLane middle, TLane high, ref float destination, nint w, bool first)
        where TLane : struct, IVectorLane<TLane>
    {
        if (!first)
        {
            middle = TLane.Add(TLane.Load(ref destination, w), middle);
        }

        TLane.Store(middle, ref destination, w);
        Put(low, high, ref destination, w, first, highOffset: 2 * w);
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void Put<TLane>(TLane low, TLane high, ref float destination, nint w, bool first, nint highOffset = 0)
        where TLane : struct, IVectorLane<TLane>
    {
        highOffset = highOffset == 0 ? w : highOffset;
        if (!first)
        {
            low = TLane.Add(TLane.Load(ref destination, 0), low);
            high = TLane.Add(TLane.Load(ref destination, highOffset), high);
        }

        TLane.Store(low, ref destination, 0);
        TLane.Store(high, ref destination, highOffset);
    }
}

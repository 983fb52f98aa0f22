using System.Diagnostics;
using System.Runtime.CompilerServices;

namespace VectorKit.Distance.Kernels;

/// <summary>
/// A metric's step-sums for a block of queries against a block of rows (both row-major, same dimension): a small GEMM
/// whose multiply-add is the metric's step.
/// </summary>
/// <remarks>
/// <para>A 4 × 4 register tile: per lane of components, 4 query loads and 4 row loads feed 16 steps into 16
/// accumulators, half a load per step, so the loop is bound by arithmetic rather than by loads. Callers keep the
/// row block in L2 and sweep it with each group of 4 queries, which stays in L1.</para>
/// <para>Squared Euclidean is summed from the differences, not expanded as ‖q‖² + ‖x‖² − 2 q·x: the expansion
/// cancels catastrophically for data far from the origin (near neighbours vanish under the norms), while the
/// difference form errs relative to the distance itself. The subtraction runs on the FP adders, beside the FMAs.</para>
/// <para>Nearest-centroid assignment uses it; the exact index's batch search scores through the faster
/// <see cref="PanelKernel"/> (dot products only) and re-scores its candidates with <see cref="ManyKernel.One{TStep}"/>.</para>
/// </remarks>
internal static class BlockKernel
{
    /// <summary><c>output[q × outputStride + r] = Σ step(queries[q], rows[r])</c> for every query and row of the blocks.</summary>
    public static void Compute<TStep>(KernelPath widest, ref float queries, int queryCount, ref float rows, int rowCount, int dimension, ref float output, int outputStride)
        where TStep : struct, IAccumulateStep
    {
        Debug.Assert(dimension > 0 && outputStride >= rowCount);
        switch (KernelDispatch.For(dimension, widest))
        {
            case KernelPath.Vector512: Compute<TStep, Lane512>(widest, ref queries, queryCount, ref rows, rowCount, dimension, ref output, outputStride); break;
            case KernelPath.Vector256: Compute<TStep, Lane256>(widest, ref queries, queryCount, ref rows, rowCount, dimension, ref output, outputStride); break;
            case KernelPath.Vector128: Compute<TStep, Lane128>(widest, ref queries, queryCount, ref rows, rowCount, dimension, ref output, outputStride); break;
            default: Compute<TStep, LaneScalar>(widest, ref queries, queryCount, ref rows, rowCount, dimension, ref output, outputStride); break;
        }
    }

    // Never inlined, like the other kernel bodies: inlined into a large caller the lane structs stop living in registers.
    [MethodImpl(MethodImplOptions.NoInlining | MethodImplOptions.AggressiveOptimization)]
    private static void Compute<TStep, TLane>(KernelPath widest, ref float queries, int queryCount, ref float rows, int rowCount, int dimension, ref float output, int outputStride)
        where TStep : struct, IAccumulateStep
        where TLane : struct, IVectorLane<TLane>
    {
        nint d = dimension;
        int q = 0;
        for (; q <= queryCount - 4; q += 4)
        {
            ref float query = ref Unsafe.Add(ref queries, q * d);
            ref float result = ref Unsafe.Add(ref output, (nint)q * outputStride);
            int r = 0;
            for (; r <= rowCount - 4; r += 4)
            {
                Tile<TStep, TLane>(ref query, ref Unsafe.Add(ref rows, r * d), d, ref Unsafe.Add(ref result, r), outputStride);
            }

            // Fewer than four rows left: one query at a time through the one-against-many kernel.
            for (int j = 0; j < 4 && r < rowCount; j++)
            {
                ManyKernel.Compute<TStep>(widest, ref Unsafe.Add(ref query, j * d), ref Unsafe.Add(ref rows, r * d), dimension, rowCount - r, ref Unsafe.Add(ref result, (j * (nint)outputStride) + r));
            }
        }

        for (; q < queryCount; q++)
        {
            ManyKernel.Compute<TStep>(widest, ref Unsafe.Add(ref queries, q * d), ref rows, dimension, rowCount, ref Unsafe.Add(ref output, (nint)q * outputStride));
        }
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void Tile<TStep, TLane>(ref float q0, ref float x0, nint d, ref float output, nint outputStride)
        where TStep : struct, IAccumulateStep
        where TLane : struct, IVectorLane<TLane>
    {
        ref float q1 = ref Unsafe.Add(ref q0, d);
        ref float q2 = ref Unsafe.Add(ref q1, d);
        ref float q3 = ref Unsafe.Add(ref q2, d);
        ref float x1 = ref Unsafe.Add(ref x0, d);
        ref float x2 = ref Unsafe.Add(ref x1, d);
        ref float x3 = ref Unsafe.Add(ref x2, d);
        TLane s00 = TLane.Zero, s01 = TLane.Zero, s02 = TLane.Zero, s03 = TLane.Zero;
        TLane s10 = TLane.Zero, s11 = TLane.Zero, s12 = TLane.Zero, s13 = TLane.Zero;
        TLane s20 = TLane.Zero, s21 = TLane.Zero, s22 = TLane.Zero, s23 = TLane.Zero;
        TLane s30 = TLane.Zero, s31 = TLane.Zero, s32 = TLane.Zero, s33 = TLane.Zero;
        nint width = TLane.Count;
        nint i = 0;
        for (; i <= d - width; i += width)
        {
            TLane a0 = TLane.Load(ref q0, i), a1 = TLane.Load(ref q1, i), a2 = TLane.Load(ref q2, i), a3 = TLane.Load(ref q3, i);
            TLane b = TLane.Load(ref x0, i);
            s00 = TStep.Step(s00, a0, b); s10 = TStep.Step(s10, a1, b); s20 = TStep.Step(s20, a2, b); s30 = TStep.Step(s30, a3, b);
            b = TLane.Load(ref x1, i);
            s01 = TStep.Step(s01, a0, b); s11 = TStep.Step(s11, a1, b); s21 = TStep.Step(s21, a2, b); s31 = TStep.Step(s31, a3, b);
            b = TLane.Load(ref x2, i);
            s02 = TStep.Step(s02, a0, b); s12 = TStep.Step(s12, a1, b); s22 = TStep.Step(s22, a2, b); s32 = TStep.Step(s32, a3, b);
            b = TLane.Load(ref x3, i);
            s03 = TStep.Step(s03, a0, b); s13 = TStep.Step(s13, a1, b); s23 = TStep.Step(s23, a2, b); s33 = TStep.Step(s33, a3, b);
        }

        if (i < d)
        {
            // Overlapping last lane; both sides are masked so every step on the lanes already summed adds zero.
            nint last = d - width;
            int skip = (int)(i - last);
            TLane a0 = TLane.LoadSkipping(ref q0, last, skip), a1 = TLane.LoadSkipping(ref q1, last, skip);
            TLane a2 = TLane.LoadSkipping(ref q2, last, skip), a3 = TLane.LoadSkipping(ref q3, last, skip);
            TLane b = TLane.LoadSkipping(ref x0, last, skip);
            s00 = TStep.Step(s00, a0, b); s10 = TStep.Step(s10, a1, b); s20 = TStep.Step(s20, a2, b); s30 = TStep.Step(s30, a3, b);
            b = TLane.LoadSkipping(ref x1, last, skip);
            s01 = TStep.Step(s01, a0, b); s11 = TStep.Step(s11, a1, b); s21 = TStep.Step(s21, a2, b); s31 = TStep.Step(s31, a3, b);
            b = TLane.LoadSkipping(ref x2, last, skip);
            s02 = TStep.Step(s02, a0, b); s12 = TStep.Step(s12, a1, b); s22 = TStep.Step(s22, a2, b); s32 = TStep.Step(s32, a3, b);
            b = TLane.LoadSkipping(ref x3, last, skip);
            s03 = TStep.Step(s03, a0, b); s13 = TStep.Step(s13, a1, b); s23 = TStep.Step(s23, a2, b); s33 = TStep.Step(s33, a3, b);
        }

        Store(ref output, TLane.Sum(s00), TLane.Sum(s01), TLane.Sum(s02), TLane.Sum(s03));
        Store(ref Unsafe.Add(ref output, outputStride), TLane.Sum(s10), TLane.Sum(s11), TLane.Sum(s12), TLane.Sum(s13));
        Store(ref Unsafe.Add(ref output, 2 * outputStride), TLane.Sum(s20), TLane.Sum(s21), TLane.Sum(s22), TLane.Sum(s23));
        Store(ref Unsafe.Add(ref output, 3 * outputStride), TLane.Sum(s30), TLane.Sum(s31), TLane.Sum(s32), TLane.Sum(s33));
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static void Store(ref float destination, float v0, float v1, float v2, float v3)
    {
        destination = v0;
        Unsafe.Add(ref destination, 1) = v1;
        Unsafe.Add(ref destination, 2) = v2;
        Unsafe.Add(ref destination, 3) = v3;
    }
}

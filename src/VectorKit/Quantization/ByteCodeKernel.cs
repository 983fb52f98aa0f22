using System.Diagnostics;
using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics;
using VectorKit.Distance.Kernels;

namespace VectorKit.Quantization;

/// <summary>
/// Distances between a float query and 8-bit scalar codes: each code byte <c>u</c> is widened to a float lane and
/// decoded as <c>offset + scale·u</c> (one FMA), then folded in by the metric's <see cref="IAccumulateStep"/>.
/// </summary>
/// <remarks>
/// <para>Written once, generic over the metric step and the lane width (512/256/128/scalar, the same lanes as the
/// float kernels). A lane of 16, 8 or 4 floats reads 16, 8 or 4 code bytes and zero-extends them
/// (<c>vpmovzxbd</c> on x86, from the portable widening operations).</para>
/// <para>Codes are padded to a multiple of 16 bytes and the prepared query, scales and offsets are padded with
/// zeros, so the padding decodes to 0 and meets a query component of 0: it adds nothing under either step, and no
/// lane ever needs a tail mask.</para>
/// <para>Summation order: two accumulators (even and odd lanes), the same for every row, so a code's distance does not
/// depend on how a scan is blocked.</para>
/// </remarks>
internal static class ByteCodeKernel
{
    /// <summary>The padding granularity of a code, in bytes (the widest lane).</summary>
    public const int Granularity = 16;

    /// <summary>The step-sum of the prepared query with each of <paramref name="codeCount"/> codes of <paramref name="paddedLength"/> bytes.</summary>
    public static void Compute<TStep>(KernelPath widest, ref float query, ref float scale, ref float offset, ref byte codes, int paddedLength, int codeCount, ref float results)
        where TStep : struct, IAccumulateStep
    {
        Debug.Assert(paddedLength % Granularity == 0);
        switch (widest)
        {
            case KernelPath.Vector512: Compute<TStep, Lane512>(ref query, ref scale, ref offset, ref codes, paddedLength, codeCount, ref results); break;
            case KernelPath.Vector256: Compute<TStep, Lane256>(ref query, ref scale, ref offset, ref codes, paddedLength, codeCount, ref results); break;
            case KernelPath.Vector128: Compute<TStep, Lane128>(ref query, ref scale, ref offset, ref codes, paddedLength, codeCount, ref results); break;
            default: Compute<TStep, LaneScalar>(ref query, ref scale, ref offset, ref codes, paddedLength, codeCount, ref results); break;
        }
    }

    [MethodImpl(MethodImplOptions.NoInlining | MethodImplOptions.AggressiveOptimization)]
    private static void Compute<TStep, TLane>(ref float query, ref float scale, ref float offset, ref byte codes, int paddedLength, int codeCount, ref float results)
        where TStep : struct, IAccumulateStep
        where TLane : struct, IVectorLane<TLane>
    {
        nint stride = paddedLength;
        for (nint r = 0; r < codeCount; r++)
        {
            Unsafe.Add(ref results, r) = One<TStep, TLane>(ref query, ref scale, ref offset, ref Unsafe.Add(ref codes, r * stride), paddedLength);
        }
    }

    /// <summary>The step-sum of the prepared query with one code (the graph index calls it per node, inlined into its walk).</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    internal static float One<TStep, TLane>(ref float q, ref float scale, ref float offset, ref byte code, int paddedLength)
        where TStep : struct, IAccumulateStep
        where TLane : struct, IVectorLane<TLane>
    {
        nint width = TLane.Count;
        nint n = paddedLength;
        TLane a0 = TLane.Zero, a1 = TLane.Zero;
        nint i = 0;
        for (; i <= n - (2 * width); i += 2 * width)
        {
            TLane x0 = TLane.MultiplyAdd(TLane.Load(ref scale, i), Widen<TLane>(ref code, i), TLane.Load(ref offset, i));
            TLane x1 = TLane.MultiplyAdd(TLane.Load(ref scale, i + width), Widen<TLane>(ref code, i + width), TLane.Load(ref offset, i + width));
            a0 = TStep.Step(a0, TLane.Load(ref q, i), x0);
            a1 = TStep.Step(a1, TLane.Load(ref q, i + width), x1);
        }

        if (i < n)
        {
            TLane x0 = TLane.MultiplyAdd(TLane.Load(ref scale, i), Widen<TLane>(ref code, i), TLane.Load(ref offset, i));
            a0 = TStep.Step(a0, TLane.Load(ref q, i), x0);
        }

        return TLane.Sum(TLane.Add(a0, a1));
    }

    /// <summary>Reads <c>TLane.Count</c> bytes at <paramref name="offset"/> and zero-extends them to floats.</summary>
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static TLane Widen<TLane>(ref byte source, nint offset)
        where TLane : struct, IVectorLane<TLane>
    {
        ref byte at = ref Unsafe.Add(ref source, offset);
        if (typeof(TLane) == typeof(Lane512))
        {
            Vector256<ushort> words = Vector256.WidenLower(Vector128.LoadUnsafe(ref at).ToVector256Unsafe());
            Vector512<float> value = Vector512.ConvertToSingle(Vector512.WidenLower(words.ToVector512Unsafe()).AsInt32());
            return Unsafe.As<Vector512<float>, TLane>(ref value);
        }

        if (typeof(TLane) == typeof(Lane256))
        {
            Vector128<ushort> words = Vector128.WidenLower(Vector128.CreateScalarUnsafe(Unsafe.ReadUnaligned<ulong>(ref at)).AsByte());
            Vector256<float> value = Vector256.ConvertToSingle(Vector256.WidenLower(words.ToVector256Unsafe()).AsInt32());
            return Unsafe.As<Vector256<float>, TLane>(ref value);
        }

        if (typeof(TLane) == typeof(Lane128))
        {
            Vector128<ushort> words = Vector128.WidenLower(Vector128.CreateScalarUnsafe(Unsafe.ReadUnaligned<uint>(ref at)).AsByte());
            Vector128<float> value = Vector128.ConvertToSingle(Vector128.WidenLower(words).AsInt32());
            return Unsafe.As<Vector128<float>, TLane>(ref value);
        }

        float scalar = at;
        return Unsafe.As<float, TLane>(ref scalar);
    }
}

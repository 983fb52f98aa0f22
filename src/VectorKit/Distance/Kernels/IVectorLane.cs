using System.Runtime.CompilerServices;
using System.Runtime.Intrinsics;

namespace VectorKit.Distance.Kernels;

/// <summary>
/// One SIMD register's worth of floats, abstracted so each kernel is written once and instantiated per width
/// (<see cref="Lane512"/>, <see cref="Lane256"/>, <see cref="Lane128"/>, <see cref="LaneScalar"/>).
/// </summary>
/// <remarks>
/// Implementations are single-field structs with aggressively inlined static members: the JIT specialises each
/// generic kernel per lane type and keeps the field in a register, so the abstraction costs nothing.
/// </remarks>
internal interface IVectorLane<TSelf>
    where TSelf : struct, IVectorLane<TSelf>
{
    /// <summary>Floats per lane.</summary>
    static abstract int Count { get; }

    /// <summary>Whether this width runs in hardware on this process (honours the DOTNET_Enable* switches).</summary>
    static abstract bool IsHardwareAccelerated { get; }

    static abstract TSelf Zero { get; }

    static abstract TSelf Load(ref float source, nint offset);

    /// <summary>Loads <see cref="Count"/> floats at <paramref name="offset"/> with the first <paramref name="skip"/> lanes zeroed.</summary>
    /// <remarks>Used for the tail: one overlapping load ending at the last element, masking the lanes already summed.</remarks>
    static abstract TSelf LoadSkipping(ref float source, nint offset, int skip);

    /// <summary>Every lane set to <paramref name="value"/>.</summary>
    static abstract TSelf Broadcast(float value);

    /// <summary>Stores the <see cref="Count"/> floats at <paramref name="offset"/>.</summary>
    static abstract void Store(TSelf value, ref float destination, nint offset);

    static abstract TSelf Add(TSelf left, TSelf right);

    static abstract TSelf Subtract(TSelf left, TSelf right);

    /// <summary><c>left × right + addend</c>, fused where the hardware has FMA.</summary>
    static abstract TSelf MultiplyAdd(TSelf left, TSelf right, TSelf addend);

    static abstract float Sum(TSelf value);

    /// <summary>
    /// The sum of the lanes, folding the upper half onto the lower one down to 128 bits first: a few instructions
    /// where <see cref="Sum"/> reduces each 128-bit quarter on its own (a different summation order).
    /// </summary>
    static abstract float SumByHalves(TSelf value);
}

internal readonly struct Lane512 : IVectorLane<Lane512>
{
    private readonly Vector512<float> _value;

    private Lane512(Vector512<float> value) => _value = value;

    public static int Count => Vector512<float>.Count;

    public static bool IsHardwareAccelerated => Vector512.IsHardwareAccelerated;

    public static Lane512 Zero => default;

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane512 Load(ref float source, nint offset) => new(Vector512.LoadUnsafe(ref source, (nuint)offset));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane512 LoadSkipping(ref float source, nint offset, int skip)
    {
        Vector512<float> keep = Vector512.GreaterThanOrEqual(Vector512<int>.Indices, Vector512.Create(skip)).AsSingle();
        return new(Vector512.LoadUnsafe(ref source, (nuint)offset) & keep);
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane512 Broadcast(float value) => new(Vector512.Create(value));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static void Store(Lane512 value, ref float destination, nint offset) => value._value.StoreUnsafe(ref destination, (nuint)offset);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane512 Add(Lane512 left, Lane512 right) => new(left._value + right._value);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane512 Subtract(Lane512 left, Lane512 right) => new(left._value - right._value);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane512 MultiplyAdd(Lane512 left, Lane512 right, Lane512 addend)
        => new(Vector512.MultiplyAddEstimate(left._value, right._value, addend._value));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float Sum(Lane512 value) => Vector512.Sum(value._value);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float SumByHalves(Lane512 value)
    {
        Vector256<float> half = value._value.GetLower() + value._value.GetUpper();
        return Vector128.Sum(half.GetLower() + half.GetUpper());
    }
}

internal readonly struct Lane256 : IVectorLane<Lane256>
{
    private readonly Vector256<float> _value;

    private Lane256(Vector256<float> value) => _value = value;

    public static int Count => Vector256<float>.Count;

    public static bool IsHardwareAccelerated => Vector256.IsHardwareAccelerated;

    public static Lane256 Zero => default;

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane256 Load(ref float source, nint offset) => new(Vector256.LoadUnsafe(ref source, (nuint)offset));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane256 LoadSkipping(ref float source, nint offset, int skip)
    {
        Vector256<float> keep = Vector256.GreaterThanOrEqual(Vector256<int>.Indices, Vector256.Create(skip)).AsSingle();
        return new(Vector256.LoadUnsafe(ref source, (nuint)offset) & keep);
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane256 Broadcast(float value) => new(Vector256.Create(value));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static void Store(Lane256 value, ref float destination, nint offset) => value._value.StoreUnsafe(ref destination, (nuint)offset);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane256 Add(Lane256 left, Lane256 right) => new(left._value + right._value);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane256 Subtract(Lane256 left, Lane256 right) => new(left._value - right._value);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane256 MultiplyAdd(Lane256 left, Lane256 right, Lane256 addend)
        => new(Vector256.MultiplyAddEstimate(left._value, right._value, addend._value));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float Sum(Lane256 value) => Vector256.Sum(value._value);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float SumByHalves(Lane256 value) => Vector128.Sum(value._value.GetLower() + value._value.GetUpper());
}

internal readonly struct Lane128 : IVectorLane<Lane128>
{
    private readonly Vector128<float> _value;

    private Lane128(Vector128<float> value) => _value = value;

    public static int Count => Vector128<float>.Count;

    public static bool IsHardwareAccelerated => Vector128.IsHardwareAccelerated;

    public static Lane128 Zero => default;

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane128 Load(ref float source, nint offset) => new(Vector128.LoadUnsafe(ref source, (nuint)offset));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane128 LoadSkipping(ref float source, nint offset, int skip)
    {
        Vector128<float> keep = Vector128.GreaterThanOrEqual(Vector128<int>.Indices, Vector128.Create(skip)).AsSingle();
        return new(Vector128.LoadUnsafe(ref source, (nuint)offset) & keep);
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane128 Broadcast(float value) => new(Vector128.Create(value));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static void Store(Lane128 value, ref float destination, nint offset) => value._value.StoreUnsafe(ref destination, (nuint)offset);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane128 Add(Lane128 left, Lane128 right) => new(left._value + right._value);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane128 Subtract(Lane128 left, Lane128 right) => new(left._value - right._value);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static Lane128 MultiplyAdd(Lane128 left, Lane128 right, Lane128 addend)
        => new(Vector128.MultiplyAddEstimate(left._value, right._value, addend._value));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float Sum(Lane128 value) => Vector128.Sum(value._value);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float SumByHalves(Lane128 value) => Vector128.Sum(value._value);
}

/// <summary>The portable fallback: one float per lane.</summary>
internal readonly struct LaneScalar : IVectorLane<LaneScalar>
{
    private readonly float _value;

    private LaneScalar(float value) => _value = value;

    public static int Count => 1;

    public static bool IsHardwareAccelerated => true;

    public static LaneScalar Zero => default;

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static LaneScalar Load(ref float source, nint offset) => new(Unsafe.Add(ref source, offset));

    // A one-float lane never overlaps the previous one, so there is never anything to skip.
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static LaneScalar LoadSkipping(ref float source, nint offset, int skip) => skip > 0 ? default : Load(ref source, offset);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static LaneScalar Broadcast(float value) => new(value);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static void Store(LaneScalar value, ref float destination, nint offset) => Unsafe.Add(ref destination, offset) = value._value;

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static LaneScalar Add(LaneScalar left, LaneScalar right) => new(left._value + right._value);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static LaneScalar Subtract(LaneScalar left, LaneScalar right) => new(left._value - right._value);

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static LaneScalar MultiplyAdd(LaneScalar left, LaneScalar right, LaneScalar addend)
        => new(float.MultiplyAddEstimate(left._value, right._value, addend._value));

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float Sum(LaneScalar value) => value._value;

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public static float SumByHalves(LaneScalar value) => value._value;
}

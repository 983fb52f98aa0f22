using System.Runtime.Intrinsics;

namespace VectorKit.Distance.Kernels;

/// <summary>The SIMD width a kernel runs at.</summary>
internal enum KernelPath
{
    Scalar = 0,
    Vector128 = 1,
    Vector256 = 2,
    Vector512 = 3,
}

/// <summary>Chooses the kernel width: the widest the hardware runs, once per process, narrowed per vector length.</summary>
/// <remarks>
/// The width is read from <c>VectorNNN.IsHardwareAccelerated</c>, which honours the runtime switches
/// <c>DOTNET_EnableAVX512=0</c> (on .NET 10 the older <c>DOTNET_EnableAVX512F=0</c> alone leaves Vector512 on),
/// <c>DOTNET_EnableAVX2=0</c> and <c>DOTNET_EnableHWIntrinsic=0</c>; the test suite runs again under each of them. Tests can also call every path narrower than <see cref="Widest"/> directly.
/// </remarks>
internal static class KernelDispatch
{
    /// <summary>The widest path this process supports.</summary>
    public static readonly KernelPath Widest =
        Lane512.IsHardwareAccelerated ? KernelPath.Vector512 :
        Lane256.IsHardwareAccelerated ? KernelPath.Vector256 :
        Lane128.IsHardwareAccelerated ? KernelPath.Vector128 :
        KernelPath.Scalar;

    /// <summary>
    /// The path to use for vectors of <paramref name="length"/> components, at most <paramref name="widest"/>.
    /// The kernels' tail handling needs at least one full lane, so short vectors drop to a narrower width.
    /// </summary>
    public static KernelPath For(int length, KernelPath widest)
    {
        if (widest >= KernelPath.Vector512 && length >= Vector512<float>.Count)
        {
            return KernelPath.Vector512;
        }

        if (widest >= KernelPath.Vector256 && length >= Vector256<float>.Count)
        {
            return KernelPath.Vector256;
        }

        if (widest >= KernelPath.Vector128 && length >= Vector128<float>.Count)
        {
            return KernelPath.Vector128;
        }

        return KernelPath.Scalar;
    }

    /// <summary>Whether <paramref name="path"/> can run on this process (for tests that sweep every path).</summary>
    public static bool IsSupported(KernelPath path) => path <= Widest;
}

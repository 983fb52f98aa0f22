using System.Runtime.Intrinsics;
using VectorKit.Distance.Kernels;

namespace VectorKit.Tests.Distance;

/// <summary>
/// The process-wide kernel width follows the hardware and the runtime's DOTNET_Enable* switches, so re-running the
/// kernel tests under those switches really exercises the narrower paths.
/// </summary>
[Trait("Category", "Kernels")]
public class KernelDispatchTests
{
    [Fact]
    public void WidestMatchesWhatTheRuntimeAccelerates()
    {
        KernelPath expected =
            Vector512.IsHardwareAccelerated ? KernelPath.Vector512 :
            Vector256.IsHardwareAccelerated ? KernelPath.Vector256 :
            Vector128.IsHardwareAccelerated ? KernelPath.Vector128 :
            KernelPath.Scalar;
        Assert.Equal(expected, KernelDispatch.Widest);
    }

    [Fact]
    public void WidestHonoursTheRuntimeSwitches()
    {
        if (Environment.GetEnvironmentVariable("DOTNET_EnableHWIntrinsic") == "0")
        {
            Assert.Equal(KernelPath.Scalar, KernelDispatch.Widest);
        }

        if (Environment.GetEnvironmentVariable("DOTNET_EnableAVX2") == "0")
        {
            Assert.True(KernelDispatch.Widest <= KernelPath.Vector128, $"DOTNET_EnableAVX2=0 but the widest path is {KernelDispatch.Widest}.");
        }

        // .NET 10 reads DOTNET_EnableAVX512 for the whole AVX-512 group; DOTNET_EnableAVX512F alone no longer turns
        // Vector512 off, so a run that sets only the old name would silently test the 512-bit path again.
        foreach (string name in new[] { "DOTNET_EnableAVX512", "DOTNET_EnableAVX512F" })
        {
            if (Environment.GetEnvironmentVariable(name) == "0")
            {
                Assert.True(
                    KernelDispatch.Widest <= KernelPath.Vector256,
                    $"{name}=0 but the widest path is {KernelDispatch.Widest}; on .NET 10 set DOTNET_EnableAVX512=0 to turn Vector512 off.");
            }
        }
    }

    // scripts/test.sh sets VECTORKIT_EXPECT_PATH together with the DOTNET_Enable* switches; unset, there is nothing to check.
    [Fact]
    public void WidestIsThePathTheRunExpects()
    {
        string? expected = Environment.GetEnvironmentVariable("VECTORKIT_EXPECT_PATH");
        if (string.IsNullOrEmpty(expected))
        {
            return;
        }

        Assert.True(Enum.TryParse(expected, ignoreCase: false, out KernelPath path) && Enum.IsDefined(path), $"VECTORKIT_EXPECT_PATH={expected} is not Scalar, Vector128, Vector256 or Vector512.");
        // "At most": the switches turn widths off, and a machine without a width is narrower still.
        Assert.True(KernelDispatch.Widest <= path, $"VECTORKIT_EXPECT_PATH={expected}, but the kernels run at {KernelDispatch.Widest}: the DOTNET_Enable* switch did not narrow them.");
    }

    [Fact]
    public void ShortVectorsDropToANarrowerPath()
    {
        foreach (KernelPath widest in KernelOracle.Paths())
        {
            for (int length = 0; length <= 40; length++)
            {
                KernelPath path = KernelDispatch.For(length, widest);
                int lanes = path switch { KernelPath.Vector512 => 16, KernelPath.Vector256 => 8, KernelPath.Vector128 => 4, _ => 1 };
                Assert.True(path <= widest, $"length {length}: {path} is wider than {widest}.");
                Assert.True(path == KernelPath.Scalar || length >= lanes, $"length {length}: {path} needs {lanes} components.");
            }
        }
    }
}

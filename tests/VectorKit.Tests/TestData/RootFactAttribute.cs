using System.Runtime.InteropServices;

namespace VectorKit.Tests.TestData;

/// <summary>
/// A test that needs root on Linux (it mounts a file system). Skipped elsewhere, except under <c>CI=true</c>, where
/// CI runs as root and a skip would hide a test that must run: there it always runs, and fails if it cannot.
/// </summary>
public sealed partial class RootFactAttribute : FactAttribute
{
    public RootFactAttribute()
    {
        if (!IsRoot && Environment.GetEnvironmentVariable("CI") != "true")
        {
            Skip = "Needs root on Linux (mounts a small tmpfs); CI runs it as root.";
        }
    }

    public static bool IsRoot => OperatingSystem.IsLinux() && GetEffectiveUserId() == 0;

    [LibraryImport("libc", EntryPoint = "geteuid")]
    private static partial uint GetEffectiveUserId();
}

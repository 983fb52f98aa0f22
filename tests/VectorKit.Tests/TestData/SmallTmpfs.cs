using System.Diagnostics;

namespace VectorKit.Tests.TestData;

/// <summary>A small tmpfs mounted on a fresh temporary folder, for tests of full disks (needs root; see <see cref="RootFactAttribute"/>).</summary>
public sealed class SmallTmpfs : IDisposable
{
    private bool _mounted;

    /// <summary>The mount point (created empty; deleted on disposal).</summary>
    public string Folder { get; } = Directory.CreateTempSubdirectory("vk-full-").FullName;

    /// <summary>Mounts a tmpfs of <paramref name="size"/> (a mount option such as <c>1m</c>) on <see cref="Folder"/>.</summary>
    public void Mount(string size)
    {
        Assert.True(Run("mount", "-t", "tmpfs", "-o", $"size={size},mode=0700", "vectorkit-full", Folder) == 0, "mounting a tmpfs failed");
        _mounted = true;
    }

    public void Dispose()
    {
        if (_mounted && Run("umount", Folder) != 0)
        {
            Run("umount", "-l", Folder);
        }

        Directory.Delete(Folder, recursive: true);
    }

    private static int Run(string program, params string[] arguments)
    {
        var start = new ProcessStartInfo(program) { RedirectStandardError = true, UseShellExecute = false };
        foreach (string argument in arguments)
        {
            start.ArgumentList.Add(argument);
        }

        using Process process = Process.Start(start)!;
        string errors = process.StandardError.ReadToEnd();
        process.WaitForExit();
        if (process.ExitCode != 0)
        {
            Console.Error.WriteLine($"{program} {string.Join(' ', arguments)}: {errors}");
        }

        return process.ExitCode;
    }
}

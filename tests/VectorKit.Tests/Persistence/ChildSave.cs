using System.Diagnostics;
using VectorKit.SaveChild;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// A running VectorKit.SaveChild process (built with the tests and copied beside them) that saves
/// <see cref="CrashSample"/>'s index over a file; the crash tests kill it with SIGKILL part-way.
/// </summary>
internal sealed class ChildSave : IDisposable
{
    // Far above a normal start; only a hung or failed child reaches it. A guard, not a timing assertion.
    private static readonly TimeSpan Patience = TimeSpan.FromSeconds(120);

    private readonly Process _process;
    private readonly Task<string> _errors;

    private ChildSave(Process process)
    {
        _process = process;
        _errors = process.StandardError.ReadToEndAsync();
    }

    public bool HasExited => _process.HasExited;

    /// <summary>Starts the child: <c>save</c> (the public save) or <c>pause</c> at <paramref name="pauseAt"/> bytes (-1: before the flush).</summary>
    public static ChildSave Start(string mode, string target, int count, int dimension, ulong seed, long pauseAt = 0)
    {
        string child = typeof(CrashSample).Assembly.Location;
        var start = new ProcessStartInfo(Host())
        {
            RedirectStandardOutput = true,
            RedirectStandardError = true,
            UseShellExecute = false,
        };
        foreach (string argument in new[] { "exec", child, mode, target, $"{count}", $"{dimension}", $"{seed}", $"{pauseAt}" })
        {
            start.ArgumentList.Add(argument);
        }

        return new ChildSave(Process.Start(start) ?? throw new InvalidOperationException("the save child did not start"));
    }

    /// <summary>The dotnet host that runs the tests (the test host may itself be an apphost), else the one on the PATH.</summary>
    private static string Host()
    {
        if (Path.GetFileNameWithoutExtension(Environment.ProcessPath) == "dotnet")
        {
            return Environment.ProcessPath!;
        }

        // The runtime lives in <root>/shared/Microsoft.NETCore.App/<version>/, the host in <root>.
        string root = Path.GetFullPath(Path.Combine(System.Runtime.InteropServices.RuntimeEnvironment.GetRuntimeDirectory(), "..", "..", ".."));
        string beside = Path.Combine(root, OperatingSystem.IsWindows() ? "dotnet.exe" : "dotnet");
        return File.Exists(beside) ? beside : Environment.GetEnvironmentVariable("DOTNET_HOST_PATH") ?? "dotnet";
    }

    /// <summary>Waits for the child's next line on standard output and checks it.</summary>
    public void Expect(string line)
    {
        Task<string?> read = _process.StandardOutput.ReadLineAsync();
        if (!read.Wait(Patience))
        {
            Kill();
            Assert.Fail($"the save child did not say '{line}' within {Patience.TotalSeconds} s");
        }

        if (read.Result != line)
        {
            Kill();
            Assert.Fail($"the save child said '{read.Result}' instead of '{line}'; its errors: {_errors.Result}");
        }
    }

    /// <summary>Kills the child with SIGKILL (what <see cref="Process.Kill()"/> sends on Unix) and waits until it is gone.</summary>
    public void Kill()
    {
        try
        {
            _process.Kill();
        }
        catch (InvalidOperationException)
        {
            // It had already exited.
        }

        Assert.True(_process.WaitForExit(Patience), "the killed save child did not exit");
    }

    /// <summary>Waits for a child that was not killed, and checks that it succeeded.</summary>
    public void WaitForSuccess()
    {
        Assert.True(_process.WaitForExit(Patience), "the save child did not finish");
        Assert.True(_process.ExitCode == 0, $"the save child exited with {_process.ExitCode}: {_errors.Result}");
    }

    public void Dispose()
    {
        if (!_process.HasExited)
        {
            Kill();
        }

        _process.Dispose();
    }
}

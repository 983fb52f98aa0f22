using System.Diagnostics;

namespace VectorKit.Cli.Tests;

/// <summary>Runs the tool as a separate process: <c>dotnet VectorKit.Cli.dll …</c> from the tool project's own build output.</summary>
internal static class Tool
{
    private static readonly TimeSpan s_patience = TimeSpan.FromMinutes(4);

    public sealed record Outcome(int ExitCode, string Output, string Error)
    {
        public string[] ErrorLines => Error.Split('\n', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries);
    }

    /// <summary>The tool's dll, built beside the tests' own configuration (the project reference builds it first).</summary>
    public static string Dll
    {
        get
        {
            string here = AppContext.BaseDirectory;
            var folder = new DirectoryInfo(here);
            while (folder is not null && !File.Exists(Path.Combine(folder.FullName, "VectorKit.sln")))
            {
                folder = folder.Parent;
            }

            Assert.NotNull(folder);
            string configuration = here.Contains($"{Path.DirectorySeparatorChar}Debug{Path.DirectorySeparatorChar}", StringComparison.Ordinal) ? "Debug" : "Release";
            string dll = Path.Combine(folder!.FullName, "src", "VectorKit.Cli", "bin", configuration, "net10.0", "VectorKit.Cli.dll");
            Assert.True(File.Exists(dll), $"the tool was not built: {dll}");
            return dll;
        }
    }

    public static Outcome Run(string workingDirectory, params string[] arguments)
    {
        var start = new ProcessStartInfo(Host())
        {
            RedirectStandardOutput = true,
            RedirectStandardError = true,
            UseShellExecute = false,
            WorkingDirectory = workingDirectory,
        };
        start.ArgumentList.Add(Dll);
        foreach (string argument in arguments)
        {
            start.ArgumentList.Add(argument);
        }

        using Process process = Process.Start(start) ?? throw new InvalidOperationException("the tool did not start");
        Task<string> output = process.StandardOutput.ReadToEndAsync();
        Task<string> error = process.StandardError.ReadToEndAsync();
        if (!process.WaitForExit(s_patience))
        {
            process.Kill(entireProcessTree: true);
            Assert.Fail($"vectorkit {string.Join(' ', arguments)} did not finish within {s_patience.TotalMinutes} minutes");
        }

        process.WaitForExit();
        return new Outcome(process.ExitCode, output.Result, error.Result);
    }

    /// <summary>The dotnet host that runs the tests, else the one on the PATH.</summary>
    public static string HostPath => Host();

    private static string Host()
    {
        if (Path.GetFileNameWithoutExtension(Environment.ProcessPath) == "dotnet")
        {
            return Environment.ProcessPath!;
        }

        string root = Path.GetFullPath(Path.Combine(System.Runtime.InteropServices.RuntimeEnvironment.GetRuntimeDirectory(), "..", "..", ".."));
        string beside = Path.Combine(root, OperatingSystem.IsWindows() ? "dotnet.exe" : "dotnet");
        return File.Exists(beside) ? beside : Environment.GetEnvironmentVariable("DOTNET_HOST_PATH") ?? "dotnet";
    }
}

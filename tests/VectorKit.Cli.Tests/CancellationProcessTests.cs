using System.Diagnostics;

namespace VectorKit.Cli.Tests;

/// <summary>Ctrl+C (SIGINT) through the process: exit code 130, nothing under the final names, whole rows kept aside for resuming.</summary>
public sealed class CancellationProcessTests : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("vk-cli-cancel-").FullName;

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    [Fact]
    public async Task Interrupt_StopsCleanly_AndTheKeptRowsResumeToTheWholeResult()
    {
        if (!OperatingSystem.IsLinux() && !OperatingSystem.IsMacOS())
        {
            return; // SIGINT is sent with kill(1).
        }

        // Exact search of 60,000 queries over 20,000 items of dimension 64: many seconds of work on any machine.
        TestFiles.WriteFvecs(Path.Combine(_folder, "data.fvecs"), TestFiles.Random(20_000, 64, 1));
        TestFiles.WriteFvecs(Path.Combine(_folder, "queries.fvecs"), TestFiles.Random(60_000, 64, 2));
        var start = new ProcessStartInfo(Tool.HostPath)
        {
            RedirectStandardOutput = true,
            RedirectStandardError = true,
            UseShellExecute = false,
            WorkingDirectory = _folder,
        };
        foreach (string a in new[] { Tool.Dll, "search", "--data", "data.fvecs", "-q", "queries.fvecs", "-o", "out.ivecs", "--queries-per-block", "500", "--threads", "1" })
        {
            start.ArgumentList.Add(a);
        }

        using Process process = Process.Start(start)!;
        Task<string> output = process.StandardOutput.ReadToEndAsync();
        var error = new List<string>();
        bool sent = false;
        while (process.StandardError.ReadLine() is { } line)
        {
            error.Add(line);
            if (!sent && line.StartsWith("search:", StringComparison.Ordinal))
            {
                // Search progress is shown: some blocks are written. Interrupt as a terminal's Ctrl+C would.
                using Process kill = Process.Start("kill", ["-INT", $"{process.Id}"])!;
                kill.WaitForExit();
                sent = true;
            }
        }

        Assert.True(process.WaitForExit(TimeSpan.FromMinutes(2)));
        Assert.True(sent, "no search progress was shown: " + string.Join('\n', error));
        Assert.True(process.ExitCode == 130, $"exit {process.ExitCode}: {string.Join('\n', error)}");
        Assert.False(File.Exists(Path.Combine(_folder, "out.ivecs")));
        Assert.False(File.Exists(Path.Combine(_folder, "out.fvecs")));
        Assert.Empty(Directory.GetFiles(_folder, ".*.tmp"));
        Assert.Contains(error, l => l.Contains("cancelled", StringComparison.Ordinal));
        _ = await output;

        // The whole blocks written before the stop were kept under .partial names; resume from the next query.
        int[][] kept = TestFiles.ReadIvecs(Path.Combine(_folder, "out.ivecs.partial"));
        Assert.True(kept.Length > 0 && kept.Length % 500 == 0 && kept.Length < 60_000, $"{kept.Length} rows kept");
        Tool.Outcome rest = Tool.Run(_folder, "--quiet", "search", "--data", "data.fvecs", "-q", "queries.fvecs", "-o", "rest.ivecs",
            "--first-query", $"{kept.Length}", "--query-count", "1000");
        Assert.Equal(0, rest.ExitCode);
        Tool.Outcome reference = Tool.Run(_folder, "--quiet", "search", "--data", "data.fvecs", "-q", "queries.fvecs", "-o", "reference.ivecs",
            "--query-count", $"{kept.Length + 1000}");
        Assert.Equal(0, reference.ExitCode);
        int[][] whole = TestFiles.ReadIvecs(Path.Combine(_folder, "reference.ivecs"));
        int[][] joined = [.. kept, .. TestFiles.ReadIvecs(Path.Combine(_folder, "rest.ivecs"))];
        Assert.Equal(whole.Length, joined.Length);
        for (int q = 0; q < whole.Length; q++)
        {
            Assert.Equal(whole[q], joined[q]);
        }
    }
}

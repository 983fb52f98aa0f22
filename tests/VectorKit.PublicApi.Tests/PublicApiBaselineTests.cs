using System.Runtime.CompilerServices;
using System.Text;
using PublicApiGenerator;
using VectorKit.Indexes;

namespace VectorKit.PublicApi.Tests;

/// <summary>
/// Keeps the library's public surface in a committed text file, so every change to it shows in review: the test
/// generates the public API of the VectorKit assembly and compares it with <c>VectorKit.approved.txt</c>. On a
/// mismatch it fails with a short diff and writes the new text to <c>VectorKit.received.txt</c> beside it; with
/// <c>VECTORKIT_ACCEPT_API=1</c> (scripts/accept-public-api.sh) it overwrites the approved file instead.
/// </summary>
public sealed class PublicApiBaselineTests
{
    private const string AcceptVariable = "VECTORKIT_ACCEPT_API";
    private const int MaxDiffLines = 60;

    [Fact]
    public void PublicApiMatchesApprovedFile()
    {
        // Assembly attributes (target framework, InternalsVisibleTo, version) are build details, not API.
        var options = new ApiGeneratorOptions { IncludeAssemblyAttributes = false };
        string received = Normalise(typeof(IVectorIndex).Assembly.GeneratePublicApi(options));

        string directory = SourceDirectory();
        string approvedPath = Path.Combine(directory, "VectorKit.approved.txt");
        string receivedPath = Path.Combine(directory, "VectorKit.received.txt");

        if (Environment.GetEnvironmentVariable(AcceptVariable) == "1")
        {
            File.WriteAllText(approvedPath, received);
            File.Delete(receivedPath);
            return;
        }

        string? approved = File.Exists(approvedPath) ? Normalise(File.ReadAllText(approvedPath)) : null;
        if (approved == received)
        {
            File.Delete(receivedPath);
            return;
        }

        File.WriteAllText(receivedPath, received);
        string how = $"New text written to {receivedPath}. If the change is intended, run scripts/accept-public-api.sh " +
            $"(or set {AcceptVariable}=1) and commit the approved file with the change.";
        Assert.Fail(approved is null
            ? $"No approved public API file at {approvedPath}. {how}"
            : $"The public API differs from {approvedPath} (- approved, + received):\n{Diff(approved, received)}\n{how}");
    }

    private static string Normalise(string text) => text.Replace("\r\n", "\n").TrimEnd('\n') + "\n";

    // The directory of this source file, so the approved file is found from a clean clone; when the compiler mapped
    // source paths away, the project directory is found by walking up from the test's output directory.
    private static string SourceDirectory([CallerFilePath] string sourceFile = "")
    {
        string? directory = Path.GetDirectoryName(sourceFile);
        if (directory is not null && File.Exists(Path.Combine(directory, "VectorKit.PublicApi.Tests.csproj")))
        {
            return directory;
        }

        for (var dir = new DirectoryInfo(AppContext.BaseDirectory); dir is not null; dir = dir.Parent)
        {
            if (File.Exists(Path.Combine(dir.FullName, "VectorKit.PublicApi.Tests.csproj")))
            {
                return dir.FullName;
            }
        }

        throw new InvalidOperationException($"The test project directory was not found from {sourceFile} or {AppContext.BaseDirectory}.");
    }

    // A line diff of the region between the common first and last lines (longest common subsequence), capped.
    private static string Diff(string approved, string received)
    {
        string[] a = approved.Split('\n');
        string[] b = received.Split('\n');
        int start = 0;
        while (start < a.Length && start < b.Length && a[start] == b[start])
        {
            start++;
        }

        int endA = a.Length;
        int endB = b.Length;
        while (endA > start && endB > start && a[endA - 1] == b[endB - 1])
        {
            endA--;
            endB--;
        }

        int n = endA - start;
        int m = endB - start;
        var lines = new List<string>();
        if ((long)n * m > 4_000_000)
        {
            lines.AddRange(a[start..endA].Select(line => "- " + line));
            lines.AddRange(b[start..endB].Select(line => "+ " + line));
        }
        else
        {
            // common[i, j]: length of the longest common subsequence of a[start + i..endA] and b[start + j..endB].
            var common = new int[n + 1, m + 1];
            for (int i = n - 1; i >= 0; i--)
            {
                for (int j = m - 1; j >= 0; j--)
                {
                    common[i, j] = a[start + i] == b[start + j]
                        ? common[i + 1, j + 1] + 1
                        : Math.Max(common[i + 1, j], common[i, j + 1]);
                }
            }

            int x = 0;
            int y = 0;
            while (x < n || y < m)
            {
                if (x < n && y < m && a[start + x] == b[start + y])
                {
                    x++;
                    y++;
                }
                else if (y == m || (x < n && common[x + 1, y] >= common[x, y + 1]))
                {
                    lines.Add($"- {a[start + x++]}");
                }
                else
                {
                    lines.Add($"+ {b[start + y++]}");
                }
            }
        }

        var text = new StringBuilder();
        text.Append("@@ line ").Append(start + 1).Append(" @@\n");
        foreach (string line in lines.Take(MaxDiffLines))
        {
            text.Append(line).Append('\n');
        }

        if (lines.Count > MaxDiffLines)
        {
            text.Append("... ").Append(lines.Count - MaxDiffLines).Append(" more changed lines\n");
        }

        return text.ToString();
    }
}

namespace VectorKit.Cli.Tests;

/// <summary>
/// Bad inputs through the process: one clear line on the error stream, no stack trace, the documented exit code, and
/// nothing under the final output name.
/// </summary>
public sealed class BadInputProcessTests : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("vk-cli-bad-").FullName;

    public BadInputProcessTests()
    {
        TestFiles.WriteFvecs(Path.Combine(_folder, "data.fvecs"), TestFiles.Random(300, 8, 1));
        TestFiles.WriteFvecs(Path.Combine(_folder, "queries.fvecs"), TestFiles.Random(20, 8, 2));
        TestFiles.WriteFvecs(Path.Combine(_folder, "wide.fvecs"), TestFiles.Random(20, 9, 3));
    }

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    [Fact]
    public void MissingQueryFile_IsBadInput()
    {
        Tool.Outcome o = Tool.Run(_folder, "--quiet", "search", "--data", "data.fvecs", "-q", "absent.fvecs", "-o", "out.ivecs");
        AssertOneLine(o, 3, "absent.fvecs", "does not exist");
        AssertNoOutput("out.ivecs", "out.fvecs");
    }

    [Fact]
    public void TruncatedDataFile_IsBadInput_WithTheOffset()
    {
        byte[] whole = File.ReadAllBytes(Path.Combine(_folder, "data.fvecs"));
        File.WriteAllBytes(Path.Combine(_folder, "cut.fvecs"), whole[..(whole.Length - 10)]);
        Tool.Outcome o = Tool.Run(_folder, "--quiet", "build", "--data", "cut.fvecs", "--kind", "exact", "-o", "cut.vkx");
        AssertOneLine(o, 3, "cut.fvecs", "offset");
        AssertNoOutput("cut.vkx");
    }

    [Fact]
    public void QueriesOfAnotherDimension_AreBadInput()
    {
        Assert.Equal(0, Tool.Run(_folder, "build", "--data", "data.fvecs", "--kind", "graph", "-o", "g.vkx", "--quiet").ExitCode);
        Tool.Outcome o = Tool.Run(_folder, "--quiet", "search", "--index", "g.vkx", "-q", "wide.fvecs", "-o", "out.ivecs");
        AssertOneLine(o, 3, "wide.fvecs", "dimension 9");
        AssertNoOutput("out.ivecs", "out.fvecs");
    }

    [Fact]
    public void OutputInAMissingFolder_IsAnOutputFailure()
    {
        Tool.Outcome o = Tool.Run(_folder, "--quiet", "search", "--data", "data.fvecs", "-q", "queries.fvecs", "-o", "no-such-folder/out.ivecs");
        AssertOneLine(o, 4, "out.ivecs", "does not exist");
        Assert.False(Directory.Exists(Path.Combine(_folder, "no-such-folder")));
    }

    [Theory]
    [InlineData("0")]
    [InlineData("-3")]
    public void NonPositiveK_IsABadArgument(string k)
    {
        Tool.Outcome o = Tool.Run(_folder, "--quiet", "search", "--data", "data.fvecs", "-q", "queries.fvecs", "-o", "out.ivecs", "--k", k);
        AssertOneLine(o, 2, "--k", "at least 1");
        AssertNoOutput("out.ivecs", "out.fvecs");
    }

    [Fact]
    public void DamagedIndexFile_IsBadInput_WithTheOffset()
    {
        Assert.Equal(0, Tool.Run(_folder, "build", "--data", "data.fvecs", "--kind", "exact", "-o", "e.vkx", "--quiet").ExitCode);
        string path = Path.Combine(_folder, "e.vkx");
        byte[] bytes = File.ReadAllBytes(path);
        bytes[^30] ^= 0x10; // inside the vectors' payload
        File.WriteAllBytes(path, bytes);
        Tool.Outcome o = Tool.Run(_folder, "--quiet", "search", "--index", "e.vkx", "-q", "queries.fvecs", "-o", "out.ivecs");
        AssertOneLine(o, 3, "e.vkx", "at byte");
        Assert.Contains("checksum", o.Error, StringComparison.Ordinal);
        AssertNoOutput("out.ivecs", "out.fvecs");
    }

    private static void AssertOneLine(Tool.Outcome o, int exitCode, params string[] mentions)
    {
        Assert.True(o.ExitCode == exitCode, $"exit code {o.ExitCode}, expected {exitCode}; stderr: {o.Error}");
        string[] lines = o.ErrorLines;
        Assert.True(lines.Length == 1, $"expected one error line, got {lines.Length}: {o.Error}");
        Assert.StartsWith("vectorkit: error: ", lines[0], StringComparison.Ordinal);
        Assert.DoesNotContain("   at ", o.Error, StringComparison.Ordinal);
        foreach (string mention in mentions)
        {
            Assert.Contains(mention, lines[0], StringComparison.Ordinal);
        }
    }

    private void AssertNoOutput(params string[] names)
    {
        foreach (string name in names)
        {
            Assert.False(File.Exists(Path.Combine(_folder, name)), $"{name} exists");
        }

        // No temporary file left behind either.
        Assert.Empty(Directory.GetFiles(_folder, ".*.tmp"));
    }
}

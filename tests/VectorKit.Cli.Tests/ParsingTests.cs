namespace VectorKit.Cli.Tests;

/// <summary>The command line parsed in-process: bad arguments give exit code 2 and one message, before any file is touched.</summary>
public sealed class ParsingTests
{
    [Theory]
    [InlineData("frobnicate")]
    [InlineData("search", "--queries", "q.fvecs", "-o", "out.ivecs")]
    [InlineData("search", "--index", "a.vkx", "--data", "d.fvecs", "-q", "q.fvecs", "-o", "out.ivecs")]
    [InlineData("search", "--data", "d.fvecs", "-q", "q.fvecs", "-o", "out.ivecs", "--k", "zero")]
    [InlineData("search", "--data", "d.fvecs", "-q", "q.fvecs", "-o", "out.ivecs", "--id-range", "9:3")]
    [InlineData("search", "--data", "d.fvecs", "-q", "q.fvecs", "-o", "out.ivecs", "--threads", "0")]
    [InlineData("search", "--data", "d.fvecs", "-q", "q.fvecs", "-o", "out.txt")]
    [InlineData("build", "--data", "d.fvecs", "-o", "x.vkx", "--kind", "tree")]
    [InlineData("build", "--data", "d.fvecs", "-o", "x.vkx", "--storage", "4bit")]
    [InlineData("build", "--data", "d.unknown", "-o", "x.vkx")]
    [InlineData("tune", "--index", "a.vkx", "-q", "q.fvecs", "--data", "d.fvecs", "--target-recall", "1.5")]
    [InlineData("evaluate", "--index", "a.vkx", "-q", "q.fvecs")]
    public void BadArguments_ExitWithTwo(params string[] args)
    {
        var output = new StringWriter();
        var error = new StringWriter();
        int code = CliApp.Run(args, output, error);
        Assert.True(code == ExitCodes.BadArguments, $"exit {code}: {error}");
        Assert.StartsWith("vectorkit: error: ", error.ToString(), StringComparison.Ordinal);
        Assert.DoesNotContain("   at ", error.ToString(), StringComparison.Ordinal);
    }

    [Fact]
    public void Help_ListsEveryCommand()
    {
        var output = new StringWriter();
        Assert.Equal(0, CliApp.Run(["--help"], output, new StringWriter()));
        foreach (string command in new[] { "build", "search", "evaluate", "tune", "inspect", "plot", "demo" })
        {
            Assert.Contains(command, output.ToString(), StringComparison.Ordinal);
        }
    }

    [Fact]
    public void ExitCodes_AreDistinct()
    {
        int[] codes = [ExitCodes.Success, ExitCodes.InternalError, ExitCodes.BadArguments, ExitCodes.BadInput, ExitCodes.OutputFailed, ExitCodes.TargetNotReached, ExitCodes.Cancelled];
        Assert.Equal(codes.Length, codes.Distinct().Count());
    }
}

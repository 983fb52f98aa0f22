using System.Buffers.Binary;
using System.Globalization;
using System.Text;
using System.Text.Json;

namespace VectorKit.Cli.Tests;

/// <summary>The other commands through the process on a small random set: formats agree, filters hold, inspect, tune and plot run.</summary>
public sealed class CommandsProcessTests : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("vk-cli-commands-").FullName;

    public CommandsProcessTests()
    {
        TestFiles.WriteFvecs(Path.Combine(_folder, "data.fvecs"), TestFiles.Random(2_000, 16, 1));
        TestFiles.WriteFvecs(Path.Combine(_folder, "queries.fvecs"), TestFiles.Random(50, 16, 2));
    }

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    [Fact]
    public void EveryResultFormat_HoldsTheSameNeighbours()
    {
        foreach (string name in new[] { "r.ivecs", "r.npy", "r.csv", "r.jsonl" })
        {
            Run("search", "--data", "data.fvecs", "-q", "queries.fvecs", "-o", name, "--k", "5");
        }

        int[][] ivecs = TestFiles.ReadIvecs(Path.Combine(_folder, "r.ivecs"));
        Assert.Equal(50, ivecs.Length);

        // .npy: 128-byte header declaring (50, 5) int64, then the rows.
        byte[] npy = File.ReadAllBytes(Path.Combine(_folder, "r.npy"));
        string header = Encoding.ASCII.GetString(npy, 10, 118);
        Assert.Contains("'descr': '<i8'", header, StringComparison.Ordinal);
        Assert.Contains("'shape': (50, 5)", header, StringComparison.Ordinal);
        long[] npyIds = [.. Enumerable.Range(0, 250).Select(i => BinaryPrimitives.ReadInt64LittleEndian(npy.AsSpan(128 + (i * 8))))];

        string[] csv = File.ReadAllLines(Path.Combine(_folder, "r.csv"));
        Assert.Equal("query,rank,id,distance", csv[0]);
        Assert.Equal(251, csv.Length);

        string[] jsonl = File.ReadAllLines(Path.Combine(_folder, "r.jsonl"));
        Assert.Equal(50, jsonl.Length);
        for (int q = 0; q < 50; q++)
        {
            using JsonDocument line = JsonDocument.Parse(jsonl[q]);
            Assert.Equal(q, line.RootElement.GetProperty("query").GetInt32());
            int[] fromJson = [.. line.RootElement.GetProperty("ids").EnumerateArray().Select(e => e.GetInt32())];
            Assert.Equal(ivecs[q], fromJson);
            Assert.Equal(ivecs[q].Select(v => (long)v), npyIds.AsSpan(q * 5, 5).ToArray());
            for (int r = 0; r < 5; r++)
            {
                string[] cells = csv[1 + (q * 5) + r].Split(',');
                Assert.Equal(ivecs[q][r], int.Parse(cells[2], CultureInfo.InvariantCulture));
            }
        }
    }

    [Fact]
    public void IdRangeAndIdList_OnlyReturnPassingItems()
    {
        File.WriteAllLines(Path.Combine(_folder, "allowed.txt"), Enumerable.Range(0, 2_000).Where(i => i % 7 == 0).Select(i => $"{i}"));
        Run("search", "--data", "data.fvecs", "-q", "queries.fvecs", "-o", "range.ivecs", "--id-range", "100:300");
        Run("search", "--data", "data.fvecs", "-q", "queries.fvecs", "-o", "list.ivecs", "--only-ids", "allowed.txt");
        Assert.All(TestFiles.ReadIvecs(Path.Combine(_folder, "range.ivecs")).SelectMany(r => r), id => Assert.InRange(id, 100, 299));
        Assert.All(TestFiles.ReadIvecs(Path.Combine(_folder, "list.ivecs")).SelectMany(r => r), id => Assert.Equal(0, id % 7));
    }

    [Fact]
    public void InspectTuneAndPlot_Run()
    {
        Run("build", "--data", "data.fvecs", "--kind", "inverted-file", "--lists", "16", "--storage", "8bit", "-o", "ivf.vkx");
        using (JsonDocument inspected = JsonDocument.Parse(Run("inspect", "ivf.vkx", "--verify", "--json").Output))
        {
            JsonElement root = inspected.RootElement;
            Assert.Equal("inverted-file", root.GetProperty("kind").GetString());
            Assert.Equal("8bit", root.GetProperty("storage").GetString());
            Assert.Equal(16, root.GetProperty("dimension").GetInt32());
            Assert.Equal(2_000, root.GetProperty("count").GetInt64());
            Assert.True(root.GetProperty("sectionsVerified").GetBoolean());
            Assert.Equal(16, root.GetProperty("settings").GetProperty("list-count").GetDouble());
        }

        Tool.Outcome tuned = Run("tune", "--index", "ivf.vkx", "-q", "queries.fvecs", "--data", "data.fvecs", "--target-recall", "0.9", "--whole-ladder", "--report", "tune.json");
        Assert.Contains("chosen search width", tuned.Output, StringComparison.Ordinal);

        // --store: the chosen width becomes the file's tuned default, and a search without --search-width uses it.
        Tool.Outcome stored = Run("tune", "--index", "ivf.vkx", "-q", "queries.fvecs", "--data", "data.fvecs", "--target-recall", "0.9", "--store", "--report", "stored.json");
        Assert.Contains("saved into", stored.Output, StringComparison.Ordinal);
        int chosenWidth;
        using (JsonDocument storedReport = JsonDocument.Parse(File.ReadAllBytes(Path.Combine(_folder, "stored.json"))))
        {
            chosenWidth = storedReport.RootElement.GetProperty("chosenSearchWidth").GetInt32();
        }

        using (var reloaded = VectorKit.Persistence.IndexFile.Load<VectorKit.Indexes.InvertedFile.InvertedFileIndex>(Path.Combine(_folder, "ivf.vkx")))
        {
            Assert.Equal(chosenWidth, reloaded.TunedDefaults?.SearchWidth);
            Assert.Equal(2_000, reloaded.Count);
        }

        // --recall-tuning: the library's tuning, with held-out recall, stored the same way. Its intervals need more than
        // the 50 test queries to clear 0.9, so the stored rows serve as queries here.
        Tool.Outcome library = Tool.Run(_folder, "--quiet", "tune", "--index", "ivf.vkx", "-q", "data.fvecs", "--data", "data.fvecs", "--target-recall", "0.9", "--recall-tuning", "--store");
        Assert.True(library.ExitCode == 0, library.Output + library.Error);
        Assert.Contains("held out: chosen", library.Output, StringComparison.Ordinal);
        Assert.Contains("applied as the index's defaults", library.Output, StringComparison.Ordinal);
        using (var reloaded = VectorKit.Persistence.IndexFile.Load<VectorKit.Indexes.InvertedFile.InvertedFileIndex>(Path.Combine(_folder, "ivf.vkx")))
        {
            Assert.Equal(0.9, reloaded.TunedDefaults?.TargetRecall);
        }
        Run("evaluate", "--index", "ivf.vkx", "-q", "queries.fvecs", "--data", "data.fvecs", "--report", "evaluate.json");
        Run("plot", "recall-curves", "tune.json", "-o", "curves.png");
        Run("plot", "recall-histogram", "evaluate.json", "-o", "histogram.png");
        Assert.True(new FileInfo(Path.Combine(_folder, "curves.png")).Length > 10_000);
        Assert.True(new FileInfo(Path.Combine(_folder, "histogram.png")).Length > 5_000);
    }

    [Fact]
    public void FullVectorsInTheDataFile_ReScoreLikeFullVectorsInTheIndex()
    {
        string[] common = ["--kind", "inverted-file", "--lists", "8", "--storage", "product-codes", "--code-bytes", "4", "--rescore-depth", "40"];
        Run(["build", "--data", "data.fvecs", "-o", "kept.vkx", .. common]);
        Run(["build", "--data", "data.fvecs", "-o", "external.vkx", "--full-vectors-in-data-file", .. common]);
        Assert.True(new FileInfo(Path.Combine(_folder, "external.vkx")).Length < new FileInfo(Path.Combine(_folder, "kept.vkx")).Length);

        Tool.Outcome missing = Tool.Run(_folder, "--quiet", "search", "--index", "external.vkx", "-q", "queries.fvecs", "-o", "none.ivecs");
        Assert.Equal(2, missing.ExitCode);
        Assert.Contains("--full-vectors", missing.Error, StringComparison.Ordinal);

        Run("search", "--index", "kept.vkx", "-q", "queries.fvecs", "-o", "kept.ivecs");
        Run("search", "--index", "external.vkx", "-q", "queries.fvecs", "-o", "external.ivecs", "--full-vectors", "data.fvecs");
        Assert.Equal(TestFiles.ReadIvecs(Path.Combine(_folder, "kept.ivecs")), TestFiles.ReadIvecs(Path.Combine(_folder, "external.ivecs")));
    }

    private Tool.Outcome Run(params string[] arguments)
    {
        Tool.Outcome o = Tool.Run(_folder, ["--quiet", .. arguments]);
        Assert.True(o.ExitCode == 0, $"vectorkit {string.Join(' ', arguments)} exited {o.ExitCode}: {o.Error}");
        return o;
    }
}

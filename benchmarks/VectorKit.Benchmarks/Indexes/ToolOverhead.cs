using System.Diagnostics;
using System.Globalization;
using VectorKit.Indexes;
using VectorKit.IO;
using VectorKit.Persistence;

namespace VectorKit.Benchmarks.Indexes;

/// <summary>
/// The command-line tool's cost over the library on the batch job: <c>vectorkit search</c> of the 10,000 Fashion-MNIST
/// test images (top 10) against a graph index of the 60,000 training images, as a separate process (wall time from
/// start to exit: runtime start, index load, query read, search, writing .ivecs/.fvecs), against the library's
/// <c>SearchBatch</c> of the same queries on the same index file in this process, and against the shortest library
/// program doing the tool's job as a process of its own (<see cref="RunLibraryJob"/>: load, read, search, write the
/// same two files), which pays the same runtime start and compilation. Library and tool alternate each round; medians
/// are reported. The tool must be built first (<c>dotnet build src/VectorKit.Cli -c Release</c>).
/// </summary>
public static class ToolOverhead
{
    public static void Run(int rounds)
    {
        string dll = ToolDll();
        string folder = Path.GetFullPath(Path.Combine("BenchmarkDotNet.Artifacts", "tool-overhead"));
        Directory.CreateDirectory(folder);
        string index = Path.Combine(folder, "fashion-graph.vkx");
        if (!File.Exists(index))
        {
            Console.WriteLine("building the graph index of the 60,000 training images with the tool (cached for later runs)...");
            RunTool(dll, folder, "--quiet", "build", "--data", TestData.FashionTrainImages, "--kind", "graph", "-o", index);
        }

        VectorSet queries = IdxFile.ReadVectors(TestData.FashionTestImages);
        using IVectorIndex loaded = IndexFile.Load(index);
        loaded.SearchBatch(queries.Data.AsSpan(0, 100 * queries.Dimension), 10); // JIT warm-up of the library side

        var library = new List<double>();
        var toolWall = new List<double>();
        var toolSearch = new List<double>();
        var loads = new List<double>();
        var libraryProcess = new List<double>();
        var libraryProcessFullJit = new List<double>();
        for (int round = 0; round < rounds; round++)
        {
            // What a library program pays besides the search too: loading the index file and reading the queries.
            var clock = Stopwatch.StartNew();
            using (IndexFile.Load(index))
            {
                IdxFile.ReadVectors(TestData.FashionTestImages);
            }

            loads.Add(clock.Elapsed.TotalSeconds);
            clock.Restart();
            loaded.SearchBatch(queries.Data, 10);
            library.Add(clock.Elapsed.TotalSeconds);

            clock.Restart();
            RunProcess(typeof(ToolOverhead).Assembly.Location, folder, "tool-overhead-library-job", index, TestData.FashionTestImages, Path.Combine(folder, "library-neighbours.ivecs"));
            libraryProcess.Add(clock.Elapsed.TotalSeconds);

            // The same program with the tool's runtime settings (loops compiled optimised at once, no profile-guided
            // recompilation), for a like-for-like process.
            clock.Restart();
            RunProcess(typeof(ToolOverhead).Assembly.Location, folder, [("DOTNET_TC_QuickJitForLoops", "0"), ("DOTNET_TieredPGO", "0")], "tool-overhead-library-job", index, TestData.FashionTestImages, Path.Combine(folder, "library-neighbours.ivecs"));
            libraryProcessFullJit.Add(clock.Elapsed.TotalSeconds);

            clock.Restart();
            string output = RunTool(dll, folder, "--quiet", "search", "--index", index, "-q", TestData.FashionTestImages, "-o", Path.Combine(folder, "neighbours.ivecs"));
            toolWall.Add(clock.Elapsed.TotalSeconds);

            // "searched N queries (top 10) in X s, ..." : the time the tool spent inside the library's batch searches.
            string seconds = output.Split(" in ", 2)[1].Split(' ', 2)[0];
            toolSearch.Add(double.Parse(seconds, CultureInfo.InvariantCulture));
            Console.WriteLine(string.Create(CultureInfo.InvariantCulture,
                $"round {round + 1}: library load + read queries {loads[^1]:F3} s, SearchBatch {library[^1]:F3} s; library program as a process {libraryProcess[^1]:F3} s ({libraryProcessFullJit[^1]:F3} s with the tool's settings); tool process {toolWall[^1]:F3} s wall, of which searching {toolSearch[^1]:F3} s"));
        }

        double lib = Median(library), wall = Median(toolWall), search = Median(toolSearch), load = Median(loads), job = Median(libraryProcess), jobFullJit = Median(libraryProcessFullJit);
        Console.WriteLine();
        Console.WriteLine($"| measure ({rounds} rounds, medians; 10,000 queries, k = 10, all cores) | seconds | vs library search |");
        Console.WriteLine("|---|---:|---:|");
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"| library `SearchBatch` in process | {lib:F3} | 1.00 |"));
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"| library: load the index file and read the queries, in process | {load:F3} | {load / lib:F2} |"));
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"| tool: time inside the library's batch searches (blocks of 4,096 queries) | {search:F3} | {search / lib:F2} |"));
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"| library program doing the same job as its own process (start, load, read, search, write) | {job:F3} | {job / lib:F2} |"));
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"| tool: whole process (start, load index, read queries, search, write) | {wall:F3} | {wall / lib:F2} |"));
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"| the same library program with the tool's runtime settings | {jobFullJit:F3} | {jobFullJit / lib:F2} |"));
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"tool process against the library program's process: {wall - job:F3} s more ({100 * (wall - job) / lib:F1} % of the library's search time); against the same program with the tool's runtime settings: {wall - jobFullJit:F3} s more ({100 * (wall - jobFullJit) / lib:F1} %)"));
        Console.WriteLine(string.Create(CultureInfo.InvariantCulture, $"tool process beyond its search: {wall - search:F3} s ({100 * (wall - search) / lib:F1} % of the library's search time); beyond its search, the load and the read: {wall - search - load:F3} s ({100 * (wall - search - load) / lib:F1} %); search in blocks vs one batch: {100 * (search - lib) / lib:F1} %"));
    }

    private static double Median(List<double> values)
    {
        double[] sorted = [.. values.Order()];
        return sorted.Length % 2 == 1 ? sorted[sorted.Length / 2] : (sorted[(sorted.Length / 2) - 1] + sorted[sorted.Length / 2]) / 2;
    }

    /// <summary>
    /// The library program the tool is compared with, run as a process of its own by this harness: loads the index,
    /// reads the queries, searches them in one batch on all cores, and writes the top 10 as .ivecs and .fvecs.
    /// </summary>
    public static void RunLibraryJob(string index, string queries, string output)
    {
        using IVectorIndex loaded = IndexFile.Load(index);
        VectorSet rows = IdxFile.ReadVectors(queries);
        BatchSearchResults results = loaded.SearchBatch(rows.Data, 10);
        VecsFile.WriteNeighbors(output, Path.ChangeExtension(output, ".fvecs"), results);
    }

    private static string RunTool(string dll, string folder, params string[] arguments) => RunProcess(dll, folder, [], arguments);

    private static string RunProcess(string dll, string folder, params string[] arguments) => RunProcess(dll, folder, [], arguments);

    private static string RunProcess(string dll, string folder, (string Name, string Value)[] environment, params string[] arguments)
    {
        var start = new ProcessStartInfo("dotnet") { RedirectStandardOutput = true, RedirectStandardError = true, UseShellExecute = false, WorkingDirectory = folder };
        foreach ((string name, string value) in environment)
        {
            start.Environment[name] = value;
        }

        start.ArgumentList.Add(dll);
        foreach (string argument in arguments)
        {
            start.ArgumentList.Add(argument);
        }

        using Process process = Process.Start(start) ?? throw new InvalidOperationException("the tool did not start");
        Task<string> error = process.StandardError.ReadToEndAsync();
        string output = process.StandardOutput.ReadToEnd();
        process.WaitForExit();
        if (process.ExitCode != 0)
        {
            throw new InvalidOperationException($"{Path.GetFileName(dll)} {string.Join(' ', arguments)} exited {process.ExitCode}: {error.Result}");
        }

        return output;
    }

    private static string ToolDll()
    {
        var folder = new DirectoryInfo(AppContext.BaseDirectory);
        while (folder is not null && !File.Exists(Path.Combine(folder.FullName, "VectorKit.sln")))
        {
            folder = folder.Parent;
        }

        string dll = Path.Combine(folder?.FullName ?? ".", "src", "VectorKit.Cli", "bin", "Release", "net10.0", "VectorKit.Cli.dll");
        return File.Exists(dll) ? dll : throw new FileNotFoundException($"build the tool first: dotnet build src/VectorKit.Cli -c Release (looked for {dll})");
    }
}

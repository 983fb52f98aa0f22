using System.CommandLine;
using System.Diagnostics;
using System.Globalization;
using VectorKit.Distance;
using VectorKit.Indexes;
using Spectre.Console;
using VectorKit.IO;

namespace VectorKit.Cli.Commands;

/// <summary>
/// <c>demo</c>: the main batch job end to end on Fashion-MNIST when it is installed, else on an invented outdoor-gear
/// rental co-op's catalogue generated on the spot: build a graph index, search the whole query set, evaluate recall
/// against exact search, sweep the search width and draw the recall–throughput curve and the recall histogram.
/// </summary>
internal static class DemoCommand
{
    public const string FashionMnistVariable = "VECTORKIT_FASHION_MNIST";
    public const string FashionMnistDirectory = "/usr/share/datasets/fashion-mnist";

    public static Command Create(CommandContext context)
    {
        var folder = new Option<string>("--folder") { Description = "Where the demo writes its index, results, reports and plots.", DefaultValueFactory = _ => "vectorkit-demo" };
        var generated = new Option<bool>("--generated-catalogue") { Description = "Use the generated co-op catalogue even when Fashion-MNIST is installed." };
        var evaluated = new Option<int>("--evaluated-queries") { Description = "Queries whose recall is checked against exact search.", DefaultValueFactory = _ => 1000 };
        var rows = new Option<int>("--catalogue-rows") { Description = "Fashion-MNIST: index the first N training images (all 60,000 take a few times longer to build).", DefaultValueFactory = _ => 20_000 };
        var command = new Command("demo", "Run the main batch job on a built-in data set: build a graph index, search every query, evaluate recall against exact search, write plots.")
        {
            folder, generated, evaluated, rows,
        };
        command.SetAction(parsed => Run(context, parsed, parsed.GetValue(folder)!, parsed.GetValue(generated), Shared.Positive(parsed.GetValue(evaluated), "--evaluated-queries"), Shared.Positive(parsed.GetValue(rows), "--catalogue-rows")));
        return command;
    }

    public static string FashionMnistFolder
        => Environment.GetEnvironmentVariable(FashionMnistVariable) is { Length: > 0 } dir ? dir : FashionMnistDirectory;

    private static int Run(CommandContext context, ParseResult parsed, string folder, bool forceGenerated, int evaluatedQueries, int catalogueRows)
    {
        var total = Stopwatch.StartNew();
        try
        {
            Directory.CreateDirectory(folder);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw new OutputFileException(folder, e.Message, e);
        }

        string train = Path.Combine(FashionMnistFolder, "train-images-idx3-ubyte.gz");
        string test = Path.Combine(FashionMnistFolder, "t10k-images-idx3-ubyte.gz");
        string dataName;
        if (!forceGenerated && File.Exists(train) && File.Exists(test))
        {
            catalogueRows = Math.Min(catalogueRows, 60_000);
            dataName = $"Fashion-MNIST ({catalogueRows:N0} of the 60,000 training images as the catalogue, the 10,000 test images as queries, 784 pixels)";
        }
        else
        {
            dataName = "generated rental co-op catalogue (20,000 gear items, 2,000 member requests, 48 features)";
            catalogueRows = 20_000;
            train = Path.Combine(folder, "coop-catalogue.fvecs");
            test = Path.Combine(folder, "coop-requests.fvecs");
            GenerateCatalogue(train, test);
        }

        TextWriter o = context.Output;
        o.WriteLine($"data: {dataName}");
        string index = Path.Combine(folder, "catalogue.vkx");
        BuildReport built = BuildCommand.Run(context, parsed, new IndexSpec(IndexKindName.Graph, VectorEncoding.Float32, DistanceMetric.SquaredEuclidean), train, DataFormat.Auto, null, index, null, 8192, catalogueRows);
        o.WriteLine($"1. built a graph index of {built.Count:N0} vectors in {Shared.Seconds(built.BuildTime)}: {index}");

        string results = Path.Combine(folder, "neighbours.ivecs");
        SearchSummary searched = SearchCommand.Run(context, parsed, new SearchJob(
            index, null, null, DistanceMetric.SquaredEuclidean, test, results, ResultFormat.Vecs, DataFormat.Auto, 10, null, null, -1, null, null, 0, null, 4096));
        o.WriteLine(string.Create(CultureInfo.InvariantCulture,
            $"2. searched the top 10 of {searched.Queries:N0} queries in {searched.SearchTime.TotalSeconds:F2} s ({searched.Queries / Math.Max(searched.SearchTime.TotalSeconds, 1e-9):N0} queries/s): {string.Join(", ", searched.Files)}"));

        using Measurement m = Measurement.Open(context, parsed, index, test, null, train, null, evaluatedQueries, DataFormat.Auto, 10, catalogueRows);
        var points = new List<MeasuredPoint>();
        foreach (int width in new[] { 10, 16, 32, 64, 128 })
        {
            points.Add(m.Measure(width, -1, context.Stop));
        }

        MeasuredPoint atDefault = m.Measure(null, -1, context.Stop);
        o.WriteLine(string.Create(CultureInfo.InvariantCulture,
            $"3. recall@10 against exact search on the first {atDefault.Queries:N0} queries: {atDefault.Recall:F4} at the stored search width ({atDefault.QueriesPerSecond:N0} queries/s)"));
        var table = new Table().AddColumn("search width").AddColumn(new TableColumn("recall@10").RightAligned()).AddColumn(new TableColumn("queries/s").RightAligned());
        foreach (MeasuredPoint p in points)
        {
            table.AddRow(p.SearchWidth!.Value.ToString(CultureInfo.InvariantCulture), p.Recall.ToString("F4", CultureInfo.InvariantCulture), Shared.Number(p.QueriesPerSecond));
        }

        context.Tables().Write(table);
        string curves = Path.Combine(folder, "recall-curves.png");
        PlotCommand.DrawCurves([new PlotCommand.Curve("graph, float32", 10, [.. points.Select(p => p.Recall)], [.. points.Select(p => p.QueriesPerSecond)])], curves);
        SortedDictionary<double, int> counts = EvaluateCommand.Histogram(atDefault.PerQueryRecall);
        string histogram = Path.Combine(folder, "recall-histogram.png");
        PlotCommand.DrawHistogram(new PlotCommand.RecallHistogram("graph, float32", 10, [.. counts.Keys], [.. counts.Values]), histogram);
        o.WriteLine($"4. plots: {curves}, {histogram}");
        o.WriteLine($"done in {Shared.Seconds(total.Elapsed)}");
        return ExitCodes.Success;
    }

    /// <summary>
    /// An invented co-op's catalogue: gear items as feature vectors around a dozen category centres (tents, sleeping
    /// bags, packs, stoves, kayaks, paddles, skis, snowshoes, climbing ropes, harnesses, bikes, helmets), and member
    /// requests drawn the same way. Fixed seed, so every run gets the same files.
    /// </summary>
    private static void GenerateCatalogue(string catalogue, string requests)
    {
        const int dimension = 48, categories = 12;
        var random = new Random(2026);
        float[][] centres = [.. Enumerable.Range(0, categories).Select(_ => Enumerable.Range(0, dimension).Select(_ => (float)(random.NextDouble() * 4 - 2)).ToArray())];
        float[] Make(int rows)
        {
            var data = new float[rows * dimension];
            for (int r = 0; r < rows; r++)
            {
                float[] centre = centres[random.Next(categories)];
                for (int d = 0; d < dimension; d++)
                {
                    // Box–Muller: item-to-item spread around the category's typical features.
                    double u = 1 - random.NextDouble(), v = random.NextDouble();
                    data[(r * dimension) + d] = centre[d] + (float)(0.6 * Math.Sqrt(-2 * Math.Log(u)) * Math.Cos(2 * Math.PI * v));
                }
            }

            return data;
        }

        Write(catalogue, Make(20_000), dimension);
        Write(requests, Make(2_000), dimension);
    }

    private static void Write(string path, float[] data, int dimension)
    {
        try
        {
            using FileStream stream = File.Create(path);
            VecsFile.WriteFvecs(stream, data, dimension);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw new OutputFileException(path, e.Message, e);
        }
    }
}

using System.CommandLine;
using System.Globalization;
using System.Text.Json;
using Spectre.Console;

namespace VectorKit.Cli.Commands;

/// <summary><c>evaluate</c>: recall@k with its distribution over queries, queries/s, memory and build time, as a table or JSON.</summary>
internal static class EvaluateCommand
{
    public static Command Create(CommandContext context)
    {
        var (index, queries, truth, data, ids, count, dataRows, format, k, threads) = Measurement.Options();
        var fullVectors = Measurement.FullVectorsOption();
        var width = Shared.SearchWidth();
        var json = new Option<bool>("--json") { Description = "Print the report as JSON (for scripts) instead of a table." };
        var report = new Option<string?>("--report") { Description = "Also write the JSON report to this file (input of 'plot recall-histogram')." };
        var command = new Command("evaluate", "Measure recall@k, its distribution over queries, queries/s, memory and build time of a saved index.")
        {
            index, queries, truth, data, ids, count, dataRows, format, k, threads, fullVectors, width, json, report,
        };
        command.SetAction(parsed =>
        {
            using Measurement measurement = Measurement.Open(
                context, parsed, parsed.GetValue(index)!, parsed.GetValue(queries)!, parsed.GetValue(truth), parsed.GetValue(data), parsed.GetValue(ids),
                parsed.GetValue(count), Shared.ParseFormat(parsed.GetValue(format)!), Shared.Positive(parsed.GetValue(k), "--k"),
                Shared.PositiveOrNull(parsed.GetValue(dataRows), "--data-rows"),
                parsed.GetValue(fullVectors));
            MeasuredPoint point = measurement.Measure(parsed.GetValue(width), parsed.GetValue(threads), context.Stop);
            TimeSpan? build = BuildReport.TryReadBuildTime(Path.GetFullPath(measurement.IndexPath));
            byte[] document = Json(measurement, point, build);
            if (parsed.GetValue(report) is { } reportPath)
            {
                JsonFiles.WriteAtomically(reportPath, document);
            }

            if (parsed.GetValue(json))
            {
                context.Output.WriteLine(System.Text.Encoding.UTF8.GetString(document));
            }
            else
            {
                Table(context, measurement, point, build);
            }

            return ExitCodes.Success;
        });
        return command;
    }

    /// <summary>Recall at the given quantile of the per-query values (nearest rank on the sorted values).</summary>
    public static double Quantile(double[] sorted, double q) => sorted[Math.Clamp((int)Math.Ceiling(q * sorted.Length) - 1, 0, sorted.Length - 1)];

    /// <summary>How many queries have each recall value (with k neighbours a query's recall is one of k + 1 values).</summary>
    public static SortedDictionary<double, int> Histogram(double[] perQuery)
    {
        var counts = new SortedDictionary<double, int>();
        foreach (double r in perQuery)
        {
            counts[r] = counts.GetValueOrDefault(r) + 1;
        }

        return counts;
    }

    private static void Table(CommandContext context, Measurement m, MeasuredPoint p, TimeSpan? build)
    {
        double[] sorted = [.. p.PerQueryRecall.Order()];
        var table = new Table().AddColumn("measure").AddColumn(new TableColumn("value").RightAligned());
        table.Title = new TableTitle($"{m.IndexPath}: {p.Label}, {m.Index.Count:N0} vectors × {m.Index.Dimension}");
        table.AddRow($"recall@{p.K} (mean over {p.Queries:N0} queries)", F(p.Recall, "F4"));
        table.AddRow("recall, worst query", F(sorted[0], "F2"));
        table.AddRow("recall, 1st / 5th / 10th percentile", $"{F(Quantile(sorted, 0.01), "F2")} / {F(Quantile(sorted, 0.05), "F2")} / {F(Quantile(sorted, 0.10), "F2")}");
        table.AddRow("recall, median", F(Quantile(sorted, 0.5), "F2"));
        table.AddRow($"queries with recall 1", $"{sorted.Count(r => r >= 1):N0} ({F(100.0 * sorted.Count(r => r >= 1) / sorted.Length, "F1")} %)");
        table.AddRow($"queries/s (batch, {p.Threads} threads)", F(p.QueriesPerSecond, "N0"));
        table.AddRow("search time", Shared.Seconds(p.SearchTime));
        table.AddRow("index memory", $"{m.Index.MemoryBytes:N0} bytes ({F((double)m.Index.MemoryBytes / Math.Max(1, m.Index.Count), "N0")} per vector)");
        table.AddRow("process peak memory", $"{PeakBytes():N0} bytes");
        table.AddRow("build time", build is { } b ? Shared.Seconds(b) : "unknown (no .build.json beside the index)");
        context.Tables().Write(table);
    }

    private static byte[] Json(Measurement m, MeasuredPoint p, TimeSpan? build)
    {
        double[] sorted = [.. p.PerQueryRecall.Order()];
        using var buffer = new MemoryStream();
        using (var json = new Utf8JsonWriter(buffer, new JsonWriterOptions { Indented = true }))
        {
            json.WriteStartObject();
            json.WriteString("index", m.IndexPath);
            json.WriteString("label", p.Label);
            json.WriteNumber("count", m.Index.Count);
            json.WriteNumber("dimension", m.Index.Dimension);
            json.WriteNumber("k", p.K);
            json.WriteNumber("queries", p.Queries);
            if (p.SearchWidth is { } w)
            {
                json.WriteNumber("searchWidth", w);
            }

            json.WriteNumber("recall", p.Recall);
            json.WriteStartObject("recallDistribution");
            json.WriteNumber("min", sorted[0]);
            json.WriteNumber("p01", Quantile(sorted, 0.01));
            json.WriteNumber("p05", Quantile(sorted, 0.05));
            json.WriteNumber("p10", Quantile(sorted, 0.10));
            json.WriteNumber("median", Quantile(sorted, 0.5));
            json.WriteNumber("max", sorted[^1]);
            json.WriteEndObject();
            json.WriteStartArray("recallHistogram");
            foreach ((double recall, int queries) in Histogram(p.PerQueryRecall))
            {
                json.WriteStartObject();
                json.WriteNumber("recall", recall);
                json.WriteNumber("queries", queries);
                json.WriteEndObject();
            }

            json.WriteEndArray();
            json.WriteNumber("queriesPerSecond", Math.Round(p.QueriesPerSecond, 1));
            json.WriteNumber("searchSeconds", Math.Round(p.SearchTime.TotalSeconds, 4));
            json.WriteNumber("threads", p.Threads);
            json.WriteNumber("memoryBytes", m.Index.MemoryBytes);
            json.WriteNumber("processPeakBytes", PeakBytes());
            if (build is { } b)
            {
                json.WriteNumber("buildSeconds", Math.Round(b.TotalSeconds, 3));
            }
            else
            {
                json.WriteNull("buildSeconds");
            }

            json.WriteEndObject();
        }

        return buffer.ToArray();
    }

    private static long PeakBytes()
    {
        using var self = System.Diagnostics.Process.GetCurrentProcess();
        return self.PeakWorkingSet64;
    }

    private static string F(double value, string format) => value.ToString(format, CultureInfo.InvariantCulture);
}

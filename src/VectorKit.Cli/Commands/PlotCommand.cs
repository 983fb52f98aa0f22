using System.CommandLine;
using System.Globalization;
using System.Text.Json;

namespace VectorKit.Cli.Commands;

/// <summary><c>plot</c>: PNG pictures from the JSON reports of <c>tune</c> and <c>evaluate</c>.</summary>
internal static class PlotCommand
{
    public static Command Create(CommandContext context)
    {
        var command = new Command("plot", "Draw PNG plots from tune and evaluate reports.");
        var reports = new Argument<string[]>("reports") { Description = "Reports written by 'tune --report' (one line each).", Arity = ArgumentArity.OneOrMore };
        var output = new Option<string>("--output", "-o") { Description = "The PNG file to write.", Required = true };
        var curves = new Command("recall-curves", "Recall–throughput curves: one line per index kind / storage variant, queries/s on a log scale.") { reports, output };
        curves.SetAction(parsed =>
        {
            var series = parsed.GetValue(reports)!.Select(ReadCurve).ToList();
            string path = parsed.GetValue(output)!;
            DrawCurves(series, path);
            context.Output.WriteLine($"wrote {path}");
            return ExitCodes.Success;
        });
        var report = new Argument<string>("report") { Description = "A report written by 'evaluate --report'." };
        var histogramOutput = new Option<string>("--output", "-o") { Description = "The PNG file to write.", Required = true };
        var histogram = new Command("recall-histogram", "The number of queries at each recall@k value.") { report, histogramOutput };
        histogram.SetAction(parsed =>
        {
            string path = parsed.GetValue(histogramOutput)!;
            DrawHistogram(ReadHistogram(parsed.GetValue(report)!), path);
            context.Output.WriteLine($"wrote {path}");
            return ExitCodes.Success;
        });
        var calibration = new Argument<string>("report") { Description = "A calibration report saved from CalibrationReport.ToJson()." };
        var stagesOutput = new Option<string>("--output", "-o") { Description = "The PNG file to write.", Required = true };
        var stages = new Command("rerank-stages", "Recall after each stage of a re-ranking calibration report, with its confidence interval and the loss at each stage.") { calibration, stagesOutput };
        stages.SetAction(parsed =>
        {
            string path = parsed.GetValue(stagesOutput)!;
            DrawStages(ReadStages(parsed.GetValue(calibration)!), path);
            context.Output.WriteLine($"wrote {path}");
            return ExitCodes.Success;
        });
        command.Subcommands.Add(curves);
        command.Subcommands.Add(histogram);
        command.Subcommands.Add(stages);
        return command;
    }

    public sealed record Curve(string Label, int K, double[] Recall, double[] QueriesPerSecond);

    public sealed record RecallHistogram(string Label, int K, double[] Recall, int[] Queries);

    public static void DrawCurves(IReadOnlyList<Curve> curves, string path)
    {
        var plot = new ScottPlot.Plot();
        foreach (Curve curve in curves)
        {
            // Log scale: the line is drawn through log10(q/s) and the ticks are labelled back in q/s.
            double[] logRate = [.. curve.QueriesPerSecond.Select(q => Math.Log10(Math.Max(q, 1e-3)))];
            var line = plot.Add.Scatter(curve.Recall, logRate);
            line.LegendText = curve.Label;
            line.LineWidth = 2;
            line.MarkerSize = 7;
        }

        plot.Axes.Left.TickGenerator = new ScottPlot.TickGenerators.NumericAutomatic
        {
            MinorTickGenerator = new ScottPlot.TickGenerators.LogMinorTickGenerator(),
            IntegerTicksOnly = true,
            LabelFormatter = y => Math.Pow(10, y).ToString("N0", CultureInfo.InvariantCulture),
        };
        int k = curves.Count > 0 ? curves[0].K : 10;
        plot.Title("Recall and throughput");
        plot.XLabel($"recall@{k}");
        plot.YLabel("queries/s (log scale)");
        plot.ShowLegend(ScottPlot.Alignment.LowerLeft);
        Save(plot, path);
    }

    public static void DrawHistogram(RecallHistogram histogram, string path)
    {
        var plot = new ScottPlot.Plot();
        var bars = plot.Add.Bars(histogram.Recall, [.. histogram.Queries.Select(q => (double)q)]);
        foreach (var bar in bars.Bars)
        {
            bar.Size = 0.8 / histogram.K;
        }

        plot.Title($"Recall@{histogram.K} per query: {histogram.Label}");
        plot.XLabel($"recall@{histogram.K}");
        plot.YLabel("queries");
        plot.Axes.Margins(bottom: 0);
        Save(plot, path);
    }

    public sealed record Stage(string Name, int Depth, double Recall, double RecallLow, double RecallHigh);

    /// <summary>One bar per stage at its recall, a vertical line over its confidence interval, and the loss from the stage before written above it.</summary>
    public static void DrawStages(IReadOnlyList<Stage> stages, string path)
    {
        var plot = new ScottPlot.Plot();
        double[] positions = [.. Enumerable.Range(0, stages.Count).Select(i => (double)i)];
        var bars = plot.Add.Bars(positions, [.. stages.Select(s => s.Recall)]);
        foreach (var bar in bars.Bars)
        {
            bar.Size = 0.6;
        }

        for (int i = 0; i < stages.Count; i++)
        {
            var interval = plot.Add.Line(i, stages[i].RecallLow, i, stages[i].RecallHigh);
            interval.LineWidth = 3;
            interval.LineColor = ScottPlot.Colors.Black;
            string loss = i == 0 ? "" : $"\nloss {(stages[i - 1].Recall - stages[i].Recall).ToString("F4", CultureInfo.InvariantCulture)}";
            var label = plot.Add.Text($"{stages[i].Recall.ToString("F4", CultureInfo.InvariantCulture)}{loss}", i, stages[i].RecallHigh);
            label.LabelAlignment = ScottPlot.Alignment.LowerCenter;
        }

        plot.Axes.Bottom.SetTicks(positions, [.. stages.Select(s => $"{s.Name}\n(depth {s.Depth})")]);
        plot.Title("Recall after each re-ranking stage (bars: held-out estimate; lines: confidence interval)");
        plot.YLabel("recall");
        plot.Axes.SetLimitsY(0, 1.1);
        Save(plot, path);
    }

    private static IReadOnlyList<Stage> ReadStages(string path) => VectorFiles.Guard<IReadOnlyList<Stage>>(path, () =>
    {
        string[] names = ["Retrieval", "ExactRescoring", "PairwiseScoring", "ExhaustiveScoring"];
        try
        {
            using JsonDocument document = JsonDocument.Parse(File.ReadAllBytes(path));
            JsonElement[] stages = [.. Property(document.RootElement, "Stages").EnumerateArray()];
            if (stages.Length == 0)
            {
                throw new InputFileException(path, "the calibration report has no stages");
            }

            return [.. stages.Select(s =>
            {
                JsonElement stage = Property(s, "Stage");
                string name = stage.ValueKind == JsonValueKind.Number && stage.GetInt32() is int n && n >= 0 && n < names.Length ? names[n] : stage.ToString();
                return new Stage(name, Property(s, "Depth").GetInt32(), Property(s, "Recall").GetDouble(), Property(s, "RecallLow").GetDouble(), Property(s, "RecallHigh").GetDouble());
            })];
        }
        catch (Exception e) when (e is JsonException or KeyNotFoundException or InvalidOperationException or FormatException)
        {
            throw new InputFileException(path, $"not a calibration report (CalibrationReport.ToJson): {e.Message}", e);
        }
    });

    private static JsonElement Property(JsonElement element, string name)
    {
        foreach (JsonProperty property in element.EnumerateObject())
        {
            if (string.Equals(property.Name, name, StringComparison.OrdinalIgnoreCase))
            {
                return property.Value;
            }
        }

        throw new KeyNotFoundException($"the field '{name}' is missing");
    }

    private static void Save(ScottPlot.Plot plot, string path)
    {
        string full = Path.GetFullPath(path);
        string folder = Path.GetDirectoryName(full) ?? ".";
        if (!Directory.Exists(folder))
        {
            throw new OutputFileException(full, $"its folder '{folder}' does not exist");
        }

        byte[] png = plot.GetImageBytes(1000, 650, ScottPlot.ImageFormat.Png);
        JsonFiles.WriteAtomically(full, png);
    }

    private static Curve ReadCurve(string path) => VectorFiles.Guard(path, () =>
    {
        try
        {
            using JsonDocument document = JsonDocument.Parse(File.ReadAllBytes(path));
            JsonElement root = document.RootElement;
            JsonElement[] points = [.. root.GetProperty("points").EnumerateArray()];
            if (points.Length == 0)
            {
                throw new InputFileException(path, "the report has no measured points");
            }

            return new Curve(
                root.GetProperty("label").GetString() ?? Path.GetFileNameWithoutExtension(path),
                root.GetProperty("k").GetInt32(),
                [.. points.Select(p => p.GetProperty("recall").GetDouble())],
                [.. points.Select(p => p.GetProperty("queriesPerSecond").GetDouble())]);
        }
        catch (Exception e) when (e is JsonException or KeyNotFoundException or InvalidOperationException)
        {
            throw new InputFileException(path, $"not a report of 'tune --report': {e.Message}", e);
        }
    });

    private static RecallHistogram ReadHistogram(string path) => VectorFiles.Guard(path, () =>
    {
        try
        {
            using JsonDocument document = JsonDocument.Parse(File.ReadAllBytes(path));
            JsonElement root = document.RootElement;
            JsonElement[] bins = [.. root.GetProperty("recallHistogram").EnumerateArray()];
            return new RecallHistogram(
                root.GetProperty("label").GetString() ?? "",
                root.GetProperty("k").GetInt32(),
                [.. bins.Select(b => b.GetProperty("recall").GetDouble())],
                [.. bins.Select(b => b.GetProperty("queries").GetInt32())]);
        }
        catch (Exception e) when (e is JsonException or KeyNotFoundException or InvalidOperationException)
        {
            throw new InputFileException(path, $"not a report of 'evaluate --report': {e.Message}", e);
        }
    });
}

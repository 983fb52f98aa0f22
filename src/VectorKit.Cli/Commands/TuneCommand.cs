using System.CommandLine;
using System.Globalization;
using System.Text.Json;
using Spectre.Console;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using VectorKit.Tuning;

namespace VectorKit.Cli.Commands;

/// <summary>
/// <c>tune</c>: a sweep over the index's search width (graph: candidates kept; inverted file: lists probed) that picks
/// the smallest width whose recall@k meets a target. The choice is printed and written to the report; with
/// <c>--store</c> it becomes the index's tuned default search width, saved into the index file atomically, so later
/// searches use it without <c>--search-width</c>. With <c>--recall-tuning</c> the library's <c>RecallTuning</c> runs
/// instead: it also tunes the re-scoring depth, splits the queries into a tuning and a held-out part, and reports the
/// recall interval and the held-out recall beside the untuned defaults.
/// </summary>
internal static class TuneCommand
{
    public static Command Create(CommandContext context)
    {
        var (index, queries, truth, data, ids, count, dataRows, format, k, threads) = Measurement.Options();
        var fullVectors = Measurement.FullVectorsOption();
        var target = new Option<double>("--target-recall") { Description = "The recall@k to reach (0 to 1).", DefaultValueFactory = _ => 0.95 };
        var widths = new Option<string?>("--widths") { Description = "Comma-separated search widths to try, in increasing order. Default: a ladder suited to the kind." };
        var all = new Option<bool>("--whole-ladder") { Description = "Measure every width of the ladder (for plots) instead of stopping at the first that meets the target." };
        var report = new Option<string?>("--report") { Description = "Write every measured point as JSON to this file (input of 'plot recall-curves')." };
        var store = new Option<bool>("--store") { Description = "Save the chosen setting into the index file as its tuned default (atomically), so searches use it without --search-width." };
        var library = new Option<bool>("--recall-tuning") { Description = "Tune with the library's recall tuning (search width and re-scoring depth, held-out queries, recall intervals) instead of the width sweep." };
        var command = new Command("tune", "Sweep the search width of a saved index and pick the smallest that reaches a recall target; --store saves it into the index file as its default.")
        {
            index, queries, truth, data, ids, count, dataRows, format, k, threads, fullVectors, target, widths, all, report, store, library,
        };
        command.SetAction(parsed =>
        {
            double goal = parsed.GetValue(target);
            if (!(goal > 0 && goal <= 1))
            {
                throw new UsageException($"--target-recall must be in (0, 1]; got {goal.ToString(CultureInfo.InvariantCulture)}");
            }

            using Measurement m = Measurement.Open(
                context, parsed, parsed.GetValue(index)!, parsed.GetValue(queries)!, parsed.GetValue(truth), parsed.GetValue(data), parsed.GetValue(ids),
                parsed.GetValue(count), Shared.ParseFormat(parsed.GetValue(format)!), Shared.Positive(parsed.GetValue(k), "--k"),
                Shared.PositiveOrNull(parsed.GetValue(dataRows), "--data-rows"),
                parsed.GetValue(fullVectors));
            if (parsed.GetValue(library))
            {
                return TuneWithLibrary(context, m, goal, parsed.GetValue(store));
            }

            int[] ladder = Ladder(m, parsed.GetValue(widths));
            var points = new List<MeasuredPoint>();
            MeasuredPoint? chosen = null;
            using (ProgressLine progress = context.Progress(parsed, "sweep", "widths", ladder.Length))
            {
                foreach (int w in ladder)
                {
                    MeasuredPoint point = m.Measure(w, parsed.GetValue(threads), context.Stop);
                    points.Add(point);
                    progress.Advance(1);
                    if (point.Recall >= goal && chosen is null)
                    {
                        // Wider searches cost more per query; the first width that meets the target is the cheapest.
                        chosen = point;
                        if (!parsed.GetValue(all))
                        {
                            break;
                        }
                    }
                }
            }

            if (parsed.GetValue(report) is { } reportPath)
            {
                JsonFiles.WriteAtomically(reportPath, Json(m, points, chosen, goal));
            }

            var table = new Table().AddColumn("search width").AddColumn(new TableColumn($"recall@{m.K}").RightAligned()).AddColumn(new TableColumn("queries/s").RightAligned());
            table.Title = new TableTitle($"{m.IndexPath}: {IndexSpec.Label(m.Index)}, target recall@{m.K} ≥ {goal.ToString("F3", CultureInfo.InvariantCulture)}");
            foreach (MeasuredPoint p in points)
            {
                table.AddRow($"{p.SearchWidth}{(ReferenceEquals(p, chosen) ? " ←" : "")}", p.Recall.ToString("F4", CultureInfo.InvariantCulture), Shared.Number(p.QueriesPerSecond));
            }

            context.Tables().Write(table);
            if (chosen is null)
            {
                context.Output.WriteLine($"no width up to {ladder[^1]} reached recall@{m.K} {goal.ToString(CultureInfo.InvariantCulture)}; try larger --widths, or rebuild with more links or lists.");
                return ExitCodes.TargetNotReached;
            }

            string recall = chosen.Recall.ToString("F4", CultureInfo.InvariantCulture);
            if (parsed.GetValue(store) && m.Index is VectorIndex tunable)
            {
                tunable.ApplyTunedDefaults(new TunedSearchDefaults(chosen.SearchWidth, rescoreDepth: null, goal, m.K));
                IndexFile.Save(tunable, m.IndexPath, context.Stop);
                context.Output.WriteLine($"chosen search width: {chosen.SearchWidth} (recall@{m.K} {recall}), saved into {m.IndexPath} as its default.");
            }
            else
            {
                context.Output.WriteLine($"chosen search width: {chosen.SearchWidth} (recall@{m.K} {recall}). It is not stored in the index (add --store); search with --search-width {chosen.SearchWidth}.");
            }

            return ExitCodes.Success;
        });
        return command;
    }

    // The library's tuning on the given queries (it takes exact neighbours over the index's own vectors as the truth).
    private static int TuneWithLibrary(CommandContext context, Measurement m, double goal, bool store)
    {
        if (m.Index is not VectorIndex tunable || m.Index is ExactIndex)
        {
            throw new UsageException("--recall-tuning needs a graph or inverted-file index");
        }

        TuningReport tuned = RecallTuning.Tune(tunable, m.Queries.Data, new RecallTuningOptions { TargetRecall = goal, K = m.K, ApplyDefaults = store }, cancellationToken: context.Stop);
        context.Output.WriteLine(tuned.ToString());
        if (!tuned.TargetMet)
        {
            return ExitCodes.TargetNotReached;
        }

        if (store)
        {
            IndexFile.Save(tunable, m.IndexPath, context.Stop);
            context.Output.WriteLine($"saved into {m.IndexPath} as its default.");
        }

        return ExitCodes.Success;
    }

    private static int[] Ladder(Measurement m, string? given)
    {
        if (m.Index is ExactIndex)
        {
            throw new UsageException("an exact index has no search width to tune");
        }

        if (given is not null)
        {
            int[] parsed = [.. given.Split(',').Select(t => int.TryParse(t, NumberStyles.Integer, CultureInfo.InvariantCulture, out int v) && v > 0
                ? v
                : throw new UsageException($"--widths has '{t}'; expected positive integers separated by commas"))];
            return parsed.Length == 0 ? throw new UsageException("--widths is empty") : parsed;
        }

        if (m.Index is InvertedFileIndex inverted)
        {
            int lists = inverted.Options.ListCount;
            return [.. new[] { 1, 2, 4, 8, 12, 16, 24, 32, 48, 64, 96, 128, 192, 256, 384, 512, 1024 }.Where(w => w < lists).Append(lists)];
        }

        return [.. new[] { 16, 24, 32, 48, 64, 96, 128, 192, 256, 384, 512 }.Where(w => w > m.K).Prepend(m.K)];
    }

    private static byte[] Json(Measurement m, List<MeasuredPoint> points, MeasuredPoint? chosen, double goal)
    {
        using var buffer = new MemoryStream();
        using (var json = new Utf8JsonWriter(buffer, new JsonWriterOptions { Indented = true }))
        {
            json.WriteStartObject();
            json.WriteString("index", m.IndexPath);
            json.WriteString("label", IndexSpec.Label(m.Index));
            json.WriteNumber("k", m.K);
            json.WriteNumber("queries", m.Queries.Count);
            json.WriteNumber("targetRecall", goal);
            if (chosen?.SearchWidth is { } w)
            {
                json.WriteNumber("chosenSearchWidth", w);
            }
            else
            {
                json.WriteNull("chosenSearchWidth");
            }

            json.WriteStartArray("points");
            foreach (MeasuredPoint p in points)
            {
                json.WriteStartObject();
                json.WriteNumber("searchWidth", p.SearchWidth ?? 0);
                json.WriteNumber("recall", p.Recall);
                json.WriteNumber("queriesPerSecond", Math.Round(p.QueriesPerSecond, 1));
                json.WriteEndObject();
            }

            json.WriteEndArray();
            json.WriteEndObject();
        }

        return buffer.ToArray();
    }
}

using System.CommandLine;
using System.Diagnostics;
using System.Globalization;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.IO;

namespace VectorKit.Cli.Commands;

/// <summary>
/// <c>search</c>: the top-k of every query against a saved index, or exactly against a data file; written in blocks
/// to temporary files and renamed at the end.
/// </summary>
internal static class SearchCommand
{
    public static Command Create(CommandContext context)
    {
        var index = new Option<string?>("--index") { Description = "A saved index to search." };
        var data = new Option<string?>("--data") { Description = "Instead of --index: search this vector file exactly (no index file needed)." };
        var ids = new Option<string?>("--ids") { Description = "With --data or --full-vectors: item ids, one per row of that file. Default: row numbers." };
        var fullVectors = new Option<string?>("--full-vectors") { Description = "The data file an index built with --full-vectors-in-data-file re-scores from." };
        var metric = new Option<string>("--metric") { Description = "With --data: squared-euclidean, inner-product or cosine.", DefaultValueFactory = _ => "squared-euclidean" };
        var dataRows = Shared.DataRows();
        var queries = new Option<string>("--queries", "-q") { Description = "The query vectors.", Required = true };
        var output = new Option<string>("--output", "-o") { Description = "Results: name.ivecs (+ name.fvecs distances), name.npy (+ name.distances.npy), name.csv or name.jsonl.", Required = true };
        var outputFormat = new Option<string?>("--output-format") { Description = "ivecs, npy, csv or jsonl, when the output name does not say it." };
        var format = Shared.DataFormatOption();
        var k = Shared.TopK();
        var width = Shared.SearchWidth();
        var rescore = Shared.RescoreDepth();
        var threads = Shared.Threads();
        var onlyIds = new Option<string?>("--only-ids") { Description = "Return only items whose id is in this file (same formats as --ids)." };
        var idRange = new Option<string?>("--id-range") { Description = "Return only items with FROM ≤ id < TO, written FROM:TO." };
        var first = new Option<long>("--first-query") { Description = "Start at this query (0-based): continue a stopped run into another file.", DefaultValueFactory = _ => 0 };
        var queryCount = new Option<long?>("--query-count") { Description = "Search this many queries from --first-query. Default: to the end." };
        var block = new Option<int>("--queries-per-block") { Description = "Queries searched (in parallel) and written at a time.", DefaultValueFactory = _ => 4096 };
        var command = new Command("search", "Search the top-k neighbours of every query and write them to a file.")
        {
            index, data, ids, fullVectors, metric, dataRows, queries, output, outputFormat, format, k, width, rescore, threads, onlyIds, idRange, first, queryCount, block,
        };
        command.SetAction(parsed =>
        {
            var job = new SearchJob(
                parsed.GetValue(index), parsed.GetValue(data), parsed.GetValue(ids), IndexSpec.ParseMetric(parsed.GetValue(metric)!), parsed.GetValue(queries)!, parsed.GetValue(output)!,
                NeighborWriter.Detect(parsed.GetValue(output)!, parsed.GetValue(outputFormat)), Shared.ParseFormat(parsed.GetValue(format)!),
                Shared.Positive(parsed.GetValue(k), "--k"), parsed.GetValue(width), parsed.GetValue(rescore), parsed.GetValue(threads),
                parsed.GetValue(onlyIds), parsed.GetValue(idRange), parsed.GetValue(first), parsed.GetValue(queryCount),
                Shared.Positive(parsed.GetValue(block), "--queries-per-block"),
                Shared.PositiveOrNull(parsed.GetValue(dataRows), "--data-rows"),
                parsed.GetValue(fullVectors));
            SearchSummary summary = Run(context, parsed, job);
            context.Output.WriteLine(string.Create(CultureInfo.InvariantCulture,
                $"searched {summary.Queries:N0} queries (top {job.K}) in {summary.SearchTime.TotalSeconds:F2} s, {summary.Queries / Math.Max(summary.SearchTime.TotalSeconds, 1e-9):N0} queries/s; wrote {string.Join(", ", summary.Files)}"));
            return ExitCodes.Success;
        });
        return command;
    }

    public static SearchSummary Run(CommandContext context, ParseResult parsed, SearchJob job)
    {
        CancellationToken stop = context.Stop;
        if ((job.IndexPath is null) == (job.DataPath is null))
        {
            throw new UsageException("give exactly one of --index (a saved index) and --data (exact search over a vector file)");
        }

        if (job.FirstQuery < 0 || job.QueryCount is < 0)
        {
            throw new UsageException("--first-query and --query-count must not be negative");
        }

        string outputFolder = Path.GetDirectoryName(Path.GetFullPath(job.OutputPath)) ?? ".";
        if (!Directory.Exists(outputFolder))
        {
            // Checked before any work, so a long load does not end in this failure.
            throw new OutputFileException(Path.GetFullPath(job.OutputPath), $"its folder '{outputFolder}' does not exist");
        }

        Func<long, bool>? filter = Filter(job.OnlyIdsPath, job.IdRange, stop);
        SearchOptions options = Shared.SearchOptions(job.SearchWidth, job.RescoreDepth, job.Threads, filter);
        (int queryDimension, long queryRows) = VectorFiles.Shape(job.QueriesPath, job.Format, stop);
        using IVectorIndex index = job.IndexPath is not null
            ? VectorFiles.LoadIndex(job.IndexPath, parsed.GetValue(CliApp.UntrustedIndex), stop)
            : LoadExact(context, parsed, job.DataPath!, job.Format, job.IdsPath, job.Metric, stop, job.DataRows);
        using IO.FileVectorSource? source = job.IndexPath is null ? null
            : VectorFiles.AttachFullVectors(index, job.IndexPath, job.FullVectorsPath, job.IdsPath is null ? null : VectorFiles.ReadIds(job.IdsPath, stop));
        Shared.CheckDimension(job.QueriesPath, queryDimension, index, job.IndexPath is not null ? $"the index '{job.IndexPath}'" : $"the data file '{job.DataPath}'");
        long first = Math.Min(job.FirstQuery, queryRows);
        long count = Math.Min(job.QueryCount ?? long.MaxValue, queryRows - first);

        var clock = new Stopwatch();
        var writer = NeighborWriter.Create(job.Output, job.OutputPath, job.K, first);
        try
        {
            using (ProgressLine progress = context.Progress(parsed, "search", "queries", count))
            {
                foreach (VectorSet block in VectorFiles.ReadBlocks(job.QueriesPath, job.Format, first, count, job.QueriesPerBlock, stop))
                {
                    clock.Start();
                    BatchSearchResults results = index.SearchBatch(block.Data.AsSpan(0, block.Count * block.Dimension), job.K, options, progress.Within(writer.RowsWritten), stop);
                    clock.Stop();
                    writer.Write(results);
                    progress.AtLeast(writer.RowsWritten);
                }
            }

            writer.Complete();
            return new SearchSummary(writer.RowsWritten, clock.Elapsed, writer.FinalPaths);
        }
        catch (OperationCanceledException)
        {
            // Whole blocks already written are kept under ".partial" names; the final names stay untouched.
            long done = writer.RowsWritten;
            IReadOnlyList<string> kept = writer.KeepPartial();
            if (kept.Count > 0)
            {
                context.Error.WriteLine($"vectorkit: queries {first:N0}–{first + done - 1:N0} were written to {string.Join(", ", kept)}; continue with --first-query {first + done} into another file.");
            }

            throw;
        }
        finally
        {
            writer.Dispose();
        }
    }

    /// <summary>The data file in an exact index (the tool's reference search).</summary>
    public static ExactIndex LoadExact(CommandContext context, ParseResult parsed, string dataPath, DataFormat format, string? idsPath, Distance.DistanceMetric metric, CancellationToken stop, long? maxRows = null)
    {
        (int dimension, long count) = VectorFiles.Shape(dataPath, format, stop);
        count = Math.Min(count, maxRows ?? count);
        long[]? ids = idsPath is null ? null : VectorFiles.ReadIds(idsPath, stop);
        if (ids is not null && ids.Length < count)
        {
            throw new InputFileException(idsPath!, $"it holds {ids.Length:N0} ids; the data file '{dataPath}' has {count:N0} rows");
        }

        var index = new ExactIndex(dimension, metric, new ExactIndexOptions { InitialCapacity = (int)Math.Min(count, int.MaxValue) });
        try
        {
            long row = 0;
            var blockIds = new long[8192];
            using ProgressLine progress = context.Progress(parsed, "load", "vectors", count);
            foreach (VectorSet block in VectorFiles.ReadBlocks(dataPath, format, 0, count, blockIds.Length, stop))
            {
                for (int i = 0; i < block.Count; i++)
                {
                    blockIds[i] = ids is null ? row + i : ids[row + i];
                }

                try
                {
                    index.AddRange(blockIds.AsSpan(0, block.Count), block.Data.AsSpan(0, block.Count * dimension), cancellationToken: stop);
                }
                catch (ArgumentException e)
                {
                    throw new InputFileException(idsPath ?? dataPath, $"rows {row:N0}–{row + block.Count - 1:N0}: {e.Message}");
                }

                row += block.Count;
                progress.Advance(block.Count);
            }

            return index;
        }
        catch
        {
            index.Dispose();
            throw;
        }
    }

    private static Func<long, bool>? Filter(string? onlyIdsPath, string? range, CancellationToken stop)
    {
        HashSet<long>? allowed = onlyIdsPath is null ? null : [.. VectorFiles.ReadIds(onlyIdsPath, stop)];
        long from = long.MinValue, to = long.MaxValue;
        if (range is not null)
        {
            string[] parts = range.Split(':');
            if (parts.Length != 2
                || !long.TryParse(parts[0], NumberStyles.Integer, CultureInfo.InvariantCulture, out from)
                || !long.TryParse(parts[1], NumberStyles.Integer, CultureInfo.InvariantCulture, out to)
                || from >= to)
            {
                throw new UsageException($"--id-range is '{range}'; expected FROM:TO with FROM < TO (integers), for example 1000:2000");
            }
        }

        return (allowed, range) switch
        {
            (null, null) => null,
            (null, _) => id => id >= from && id < to,
            (_, null) => allowed.Contains,
            _ => id => id >= from && id < to && allowed.Contains(id),
        };
    }
}

/// <summary>The settings of one <c>search</c> run.</summary>
internal sealed record SearchJob(
    string? IndexPath,
    string? DataPath,
    string? IdsPath,
    Distance.DistanceMetric Metric,
    string QueriesPath,
    string OutputPath,
    ResultFormat Output,
    DataFormat Format,
    int K,
    int? SearchWidth,
    int? RescoreDepth,
    int Threads,
    string? OnlyIdsPath,
    string? IdRange,
    long FirstQuery,
    long? QueryCount,
    int QueriesPerBlock,
    long? DataRows = null,
    string? FullVectorsPath = null);

/// <summary>What a <c>search</c> run did: queries answered, time spent inside the library's batch search, files written.</summary>
internal sealed record SearchSummary(long Queries, TimeSpan SearchTime, IReadOnlyList<string> Files);

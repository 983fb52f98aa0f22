using System.CommandLine;
using System.Diagnostics;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.IO;

namespace VectorKit.Cli.Commands;

/// <summary>One search setting measured: recall@k per query and overall, throughput of the library's batch search.</summary>
internal sealed record MeasuredPoint(string Label, int? SearchWidth, int K, int Queries, double Recall, double[] PerQueryRecall, TimeSpan SearchTime, int Threads)
{
    public double QueriesPerSecond => Queries / Math.Max(SearchTime.TotalSeconds, 1e-9);
}

/// <summary>What <c>evaluate</c> and <c>tune</c> share: the index, the queries and the ground truth, and one timed batch search.</summary>
internal sealed class Measurement : IDisposable
{
    private Measurement(string indexPath, IVectorIndex index, VectorSet queries, NeighborTable truth, int k)
    {
        IndexPath = indexPath;
        Index = index;
        Queries = queries;
        Truth = truth;
        K = k;
    }

    private FileVectorSource? _source;

    public string IndexPath { get; }

    public IVectorIndex Index { get; }

    public VectorSet Queries { get; }

    public NeighborTable Truth { get; }

    public int K { get; }

    public static (Option<string> Index, Option<string> Queries, Option<string?> Truth, Option<string?> Data, Option<string?> Ids, Option<long?> Count, Option<long?> DataRows, Option<string> Format, Option<int> K, Option<int> Threads) Options()
        => (new Option<string>("--index") { Description = "The saved index to evaluate.", Required = true },
            new Option<string>("--queries", "-q") { Description = "The query vectors.", Required = true },
            new Option<string?>("--ground-truth") { Description = "The true neighbours of every query (.ivecs or integer .npy), at least k per query." },
            new Option<string?>("--data") { Description = "Instead of --ground-truth: the indexed vectors; the tool computes the true neighbours by exact search." },
            new Option<string?>("--ids") { Description = "With --data: item ids, one per data row (as given to build). Default: row numbers." },
            new Option<long?>("--query-count") { Description = "Use only the first N queries (exact ground truth costs queries × items distances)." },
            Shared.DataRows(),
            Shared.DataFormatOption(),
            Shared.TopK(),
            Shared.Threads());

    public static Option<string?> FullVectorsOption() => new("--full-vectors") { Description = "The data file an index built with --full-vectors-in-data-file re-scores from (ids from --ids)." };

    public static Measurement Open(CommandContext context, ParseResult parsed, string indexPath, string queriesPath, string? truthPath, string? dataPath, string? idsPath, long? queryCount, DataFormat format, int k, long? maxDataRows = null, string? fullVectorsPath = null)
    {
        CancellationToken stop = context.Stop;
        if ((truthPath is null) == (dataPath is null))
        {
            throw new UsageException("give exactly one of --ground-truth (a file of true neighbours) and --data (the indexed vectors, for exact search)");
        }

        if (queryCount is <= 0)
        {
            throw new UsageException($"--query-count must be at least 1; got {queryCount}");
        }

        IVectorIndex index = VectorFiles.LoadIndex(indexPath, parsed.GetValue(CliApp.UntrustedIndex), stop);
        FileVectorSource? source = null;
        try
        {
            source = VectorFiles.AttachFullVectors(index, indexPath, fullVectorsPath, idsPath is null ? null : VectorFiles.ReadIds(idsPath, stop));
            (int dimension, long rows) = VectorFiles.Shape(queriesPath, format, stop);
            Shared.CheckDimension(queriesPath, dimension, index, $"the index '{indexPath}'");
            long take = Math.Min(rows, queryCount ?? rows);
            var data = new float[checked((int)(take * dimension))];
            int filled = 0;
            foreach (VectorSet block in VectorFiles.ReadBlocks(queriesPath, format, 0, take, 8192, stop))
            {
                block.Data.AsSpan(0, block.Count * dimension).CopyTo(data.AsSpan(filled));
                filled += block.Count * dimension;
            }

            var queries = new VectorSet(data, dimension);
            NeighborTable truth;
            if (truthPath is not null)
            {
                truth = VectorFiles.ReadNeighbors(truthPath);
                if (truth.QueryCount < queries.Count)
                {
                    throw new InputFileException(truthPath, $"it holds neighbours for {truth.QueryCount:N0} queries; the query file has {queries.Count:N0}");
                }

                if (truth.QueryCount > queries.Count)
                {
                    NeighborTable all = truth;
                    truth = NeighborTable.FromRows([.. Enumerable.Range(0, queries.Count).Select(q => all[q].ToArray())]);
                }

                if (truth.K < k)
                {
                    throw new InputFileException(truthPath, $"it holds {truth.K} neighbours per query; recall@{k} needs at least {k}");
                }
            }
            else
            {
                using Indexes.Exact.ExactIndex exact = SearchCommand.LoadExact(context, parsed, dataPath!, format, idsPath, index.Metric, stop, maxDataRows);
                Shared.CheckDimension(queriesPath, dimension, exact, $"the data file '{dataPath}'");
                using ProgressLine progress = context.Progress(parsed, "exact search", "queries", queries.Count);
                truth = GroundTruth.Compute(exact, queries.Data, k, new Progress<int>(_ => { }), stop);
                progress.Advance(queries.Count);
            }

            return new Measurement(indexPath, index, queries, truth, k) { _source = source };
        }
        catch
        {
            index.Dispose();
            source?.Dispose();
            throw;
        }
    }

    /// <summary>One timed batch search over every query at <paramref name="width"/>; recall per query against the truth.</summary>
    public MeasuredPoint Measure(int? width, int threads, CancellationToken stop)
    {
        SearchOptions options = Shared.SearchOptions(width, null, threads, null);
        var clock = Stopwatch.StartNew();
        BatchSearchResults results = Index.SearchBatch(Queries.Data, K, options, cancellationToken: stop);
        clock.Stop();
        var perQuery = new double[Queries.Count];
        var found = new long[K];
        for (int q = 0; q < perQuery.Length; q++)
        {
            ReadOnlySpan<SearchHit> hits = results[q];
            for (int j = 0; j < hits.Length; j++)
            {
                found[j] = hits[j].Id;
            }

            perQuery[q] = Recall.ForQuery(Truth[q], found.AsSpan(0, hits.Length), K);
        }

        double recall = Recall.AtK(Truth, results, K);
        return new MeasuredPoint(IndexSpec.Label(Index), width, K, Queries.Count, recall, perQuery, clock.Elapsed, threads == -1 ? Environment.ProcessorCount : threads);
    }

    public void Dispose()
    {
        Index.Dispose();
        _source?.Dispose();
    }
}

using System.CommandLine;
using System.Globalization;
using VectorKit.Indexes;

namespace VectorKit.Cli.Commands;

/// <summary>Options several commands share, and small checks on their values.</summary>
internal static class Shared
{
    public static Option<string> DataFormatOption() => new("--data-format")
    {
        Description = "Format of the data and query files when their names do not say it: fvecs, bvecs, npy, idx or csv.",
        DefaultValueFactory = _ => "auto",
    };

    public static Option<long?> DataRows() => new("--data-rows")
    {
        Description = "Use only the first N rows of the data file (and of the --ids file).",
    };

    public static long? PositiveOrNull(long? value, string option)
        => value is null or > 0 ? value : throw new UsageException($"{option} must be at least 1; got {value}");

    public static Option<int> TopK() => new("--k", "-k")
    {
        Description = "Neighbours per query (top-k).",
        DefaultValueFactory = _ => 10,
    };

    public static Option<int?> SearchWidth() => new("--search-width")
    {
        Description = "How widely an approximate index searches (graph: candidates kept; inverted file: lists probed). Default: the width stored in the index.",
    };

    public static Option<int?> RescoreDepth() => new("--rescore-depth")
    {
        Description = "Compressed storage: candidates re-scored with full vectors (0 = none). Default: the index's own.",
    };

    public static Option<int> Threads() => new("--threads")
    {
        Description = "Threads for batch searches; -1 (the default) uses every core.",
        DefaultValueFactory = _ => -1,
    };

    public static DataFormat ParseFormat(string text) => text switch
    {
        "auto" => DataFormat.Auto,
        "fvecs" => DataFormat.Fvecs,
        "bvecs" => DataFormat.Bvecs,
        "npy" => DataFormat.Npy,
        "idx" => DataFormat.Idx,
        "csv" => DataFormat.Csv,
        _ => throw new UsageException($"--data-format is '{text}'; expected fvecs, bvecs, npy, idx or csv"),
    };

    public static int Positive(int value, string option)
        => value > 0 ? value : throw new UsageException($"{option} must be at least 1; got {value}");

    public static SearchOptions SearchOptions(int? width, int? rescoreDepth, int threads, Func<long, bool>? filter)
    {
        if (threads == 0 || threads < -1)
        {
            throw new UsageException($"--threads must be -1 (every core) or at least 1; got {threads}");
        }

        try
        {
            return new SearchOptions { SearchWidth = width, RescoreDepth = rescoreDepth, MaxDegreeOfParallelism = threads, Filter = filter };
        }
        catch (ArgumentException e)
        {
            throw new UsageException(e.Message);
        }
    }

    /// <summary>Checks that queries have the index's dimension (exit code 3 names the query file).</summary>
    public static void CheckDimension(string queriesPath, int queryDimension, IVectorIndex index, string indexName)
    {
        if (queryDimension != index.Dimension)
        {
            throw new InputFileException(queriesPath, $"at byte 0: its vectors have dimension {queryDimension}, but {indexName} holds vectors of dimension {index.Dimension}");
        }
    }

    public static string Seconds(TimeSpan time) => time.TotalSeconds.ToString("F2", CultureInfo.InvariantCulture) + " s";

    public static string Number(double value, string format = "N0") => value.ToString(format, CultureInfo.InvariantCulture);
}

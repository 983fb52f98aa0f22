namespace VectorKit.Compare;

/// <summary>
/// Side-by-side comparison of library versions on Fashion-MNIST. <c>run</c> (the default) measures build time,
/// single-query and batch throughput and recall@k of the exact, inverted-file and graph indexes and prints one
/// tab-separated line per figure (version, round, kind, measure, value); <c>summarize</c> reads such lines from
/// several processes and prints the table of new/old ratios. scripts/compare-with-commit.sh compiles this same source
/// against an older commit and runs the two builds alternately.
/// </summary>
/// <remarks>
/// The source must compile against older versions of the library, so it uses only API they share:
/// <c>ExactIndex(d, metric)</c>, <c>GraphIndex(d, metric)</c>, <c>InvertedFileIndex(d, metric, options)</c> with
/// <c>ListCount</c>, <c>Train(sample)</c>, <c>AddRange(ids, vectors)</c>, <c>Search(query, Span&lt;SearchHit&gt;, options)</c>,
/// <c>SearchBatch(queries, k, options)</c>, <c>SearchOptions.SearchWidth</c> and <c>IdxFile.ReadVectors</c>.
/// </remarks>
internal static class Program
{
    public static int Main(string[] args)
    {
        try
        {
            if (args.Length > 0 && args[0] == "summarize")
            {
                return Summary.Run(args[1..]);
            }

            CompareSettings settings = CompareSettings.Parse(args.Length > 0 && args[0] == "run" ? args[1..] : args);
            Harness.Run(settings);
            return 0;
        }
        catch (ArgumentException e)
        {
            Console.Error.WriteLine($"error: {e.Message}");
            Console.Error.WriteLine(CompareSettings.Usage);
            return 2;
        }
    }
}

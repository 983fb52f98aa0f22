using System.Globalization;

namespace VectorKit.Compare;

/// <summary>What one measuring process does; parsed from <c>--name value</c> pairs.</summary>
internal sealed class CompareSettings
{
    public const string Usage =
        """
        usage: VectorKit.Compare [run] [--label NAME] [--round N] [--data DIR] [--kinds exact,inverted-file,graph]
                                 [--items N] [--reps N] [--batch-reps N] [--build-reps N] [--graph-build-reps N] [--graph-build-items N]
                                 [--single-queries N] [--exact-single-queries N] [--batch-queries N] [--check-queries N]
                                 [--k N] [--lists N] [--inverted-file-width N] [--graph-width N]
               VectorKit.Compare summarize [--base NAME] [--test NAME] FILE...
        """;

    /// <summary>The version's name printed in the first column (e.g. old, new).</summary>
    public string Label { get; private set; } = "current";

    /// <summary>The round number printed in the second column, so ratios can be paired per round.</summary>
    public int Round { get; private set; } = 1;

    public string DataDirectory { get; private set; } =
        Environment.GetEnvironmentVariable("VECTORKIT_FASHION_MNIST") ?? "/usr/share/datasets/fashion-mnist";

    public IReadOnlyList<string> Kinds { get; private set; } = ["exact", "inverted-file", "graph"];

    /// <summary>Training images indexed (Fashion-MNIST has 60,000).</summary>
    public int Items { get; private set; } = 60_000;

    /// <summary>Passes over the single queries; the median is reported.</summary>
    public int Reps { get; private set; } = 5;

    /// <summary>Batch searches of all batch queries; the median is reported (the exact index's first is also the truth).</summary>
    public int BatchReps { get; private set; } = 3;

    /// <summary>Builds of the exact and inverted-file indexes; the median is reported.</summary>
    public int BuildReps { get; private set; } = 3;

    /// <summary>Timed graph builds (on <see cref="GraphBuildItems"/> items).</summary>
    public int GraphBuildReps { get; private set; } = 2;

    /// <summary>
    /// Items in each timed graph build; when below <see cref="Items"/> the searched graph is built once more on all
    /// items (timed too, reported as <c>full_build_*</c>).
    /// </summary>
    public int GraphBuildItems { get; private set; } = 20_000;

    public int SingleQueries { get; private set; } = 1_000;

    /// <summary>The exact index scans everything per query, so fewer queries give a figure as stable.</summary>
    public int ExactSingleQueries { get; private set; } = 200;

    /// <summary>Test images in each batch search (Fashion-MNIST has 10,000).</summary>
    public int BatchQueries { get; private set; } = 10_000;

    /// <summary>Queries that check the recall of each freshly built index.</summary>
    public int CheckQueries { get; private set; } = 1_000;

    public int K { get; private set; } = 10;

    public int Lists { get; private set; } = 256;

    public int InvertedFileWidth { get; private set; } = 16;

    public int GraphWidth { get; private set; } = 64;

    public static CompareSettings Parse(string[] args)
    {
        var settings = new CompareSettings();
        for (int i = 0; i < args.Length; i += 2)
        {
            if (i + 1 >= args.Length)
            {
                throw new ArgumentException($"option '{args[i]}' needs a value");
            }

            string value = args[i + 1];
            switch (args[i])
            {
                case "--label": settings.Label = value; break;
                case "--round": settings.Round = Positive(args[i], value); break;
                case "--data": settings.DataDirectory = value; break;
                case "--kinds": settings.Kinds = ParseKinds(value); break;
                case "--items": settings.Items = Positive(args[i], value); break;
                case "--reps": settings.Reps = Positive(args[i], value); break;
                case "--batch-reps": settings.BatchReps = Positive(args[i], value); break;
                case "--build-reps": settings.BuildReps = Positive(args[i], value); break;
                case "--graph-build-reps": settings.GraphBuildReps = Positive(args[i], value); break;
                case "--graph-build-items": settings.GraphBuildItems = Positive(args[i], value); break;
                case "--single-queries": settings.SingleQueries = Positive(args[i], value); break;
                case "--exact-single-queries": settings.ExactSingleQueries = Positive(args[i], value); break;
                case "--batch-queries": settings.BatchQueries = Positive(args[i], value); break;
                case "--check-queries": settings.CheckQueries = Positive(args[i], value); break;
                case "--k": settings.K = Positive(args[i], value); break;
                case "--lists": settings.Lists = Positive(args[i], value); break;
                case "--inverted-file-width": settings.InvertedFileWidth = Positive(args[i], value); break;
                case "--graph-width": settings.GraphWidth = Positive(args[i], value); break;
                default: throw new ArgumentException($"unknown option '{args[i]}'");
            }
        }

        settings.GraphBuildItems = Math.Min(settings.GraphBuildItems, settings.Items);
        return settings;
    }

    private static int Positive(string name, string value)
    {
        if (!int.TryParse(value, NumberStyles.Integer, CultureInfo.InvariantCulture, out int n) || n <= 0)
        {
            throw new ArgumentException($"{name} must be a positive integer, got '{value}'");
        }

        return n;
    }

    private static string[] ParseKinds(string value)
    {
        string[] kinds = value.Split(',', StringSplitOptions.RemoveEmptyEntries | StringSplitOptions.TrimEntries);
        foreach (string kind in kinds)
        {
            if (kind is not ("exact" or "inverted-file" or "graph"))
            {
                throw new ArgumentException($"--kinds takes exact, inverted-file and graph, got '{kind}'");
            }
        }

        return kinds;
    }
}

using System.Globalization;

namespace VectorKit.Compare;

/// <summary>
/// Reads the lines printed by several measuring processes and prints, per kind and speed measure, the median over
/// rounds of each version, the ratio test/base of those medians, the range of the per-round ratios (a view of the
/// noise), and the recall of each version beside it. All speeds are rates, so a ratio below 1 means the test version
/// is slower.
/// </summary>
internal static class Summary
{
    /// <summary>Speed measures in table order, each with the recall measure printed beside it and its label.</summary>
    private static readonly (string Speed, string Recall, string Label)[] s_rows =
    [
        ("build_items_per_s", "build_recall", "build (items/s)"),
        ("full_build_items_per_s", "full_build_recall", "build, all items (items/s)"),
        ("single_qps", "single_recall", "single query (queries/s)"),
        ("batch_qps", "batch_recall", "batch (queries/s)"),
    ];

    public static int Run(string[] args)
    {
        string baseLabel = "old";
        string testLabel = "new";
        var files = new List<string>();
        for (int i = 0; i < args.Length; i++)
        {
            switch (args[i])
            {
                case "--base" when i + 1 < args.Length: baseLabel = args[++i]; break;
                case "--test" when i + 1 < args.Length: testLabel = args[++i]; break;
                default: files.Add(args[i]); break;
            }
        }

        if (files.Count == 0)
        {
            throw new ArgumentException("summarize needs at least one file of measurement lines");
        }

        // (version, kind, measure) → (round → value)
        var values = new Dictionary<(string, string, string), SortedDictionary<int, double>>();
        var kinds = new List<string>();
        foreach (string line in files.SelectMany(File.ReadLines))
        {
            string[] f = line.Split('\t');
            if (f.Length != 5 || !int.TryParse(f[1], NumberStyles.Integer, CultureInfo.InvariantCulture, out int round)
                || !double.TryParse(f[4], NumberStyles.Float, CultureInfo.InvariantCulture, out double value))
            {
                continue;
            }

            if (!kinds.Contains(f[2]))
            {
                kinds.Add(f[2]);
            }

            string measure = StripK(f[3]);
            if (!values.TryGetValue((f[0], f[2], measure), out SortedDictionary<int, double>? byRound))
            {
                values[(f[0], f[2], measure)] = byRound = [];
            }

            byRound[round] = value;
        }

        int k = files.SelectMany(File.ReadLines).Select(l => l.Split('\t')).Where(f => f.Length == 5 && f[3].Contains('@', StringComparison.Ordinal))
            .Select(f => int.Parse(f[3][(f[3].IndexOf('@', StringComparison.Ordinal) + 1)..], CultureInfo.InvariantCulture)).FirstOrDefault(10);
        int rounds = values.Where(e => e.Key.Item1 == testLabel).Select(e => e.Value.Count).DefaultIfEmpty(0).Max();
        Console.WriteLine($"{testLabel} vs {baseLabel}: medians over {rounds} round(s); ratio = {testLabel}/{baseLabel} (below 1: {testLabel} is slower); range = lowest and highest per-round ratio");
        Console.WriteLine();
        Console.WriteLine($"| kind | measure | {baseLabel} | {testLabel} | ratio | range | recall@{k} {baseLabel} | recall@{k} {testLabel} |");
        Console.WriteLine("|---|---|---:|---:|---:|---|---:|---:|");
        foreach (string kind in kinds)
        {
            foreach ((string speed, string recall, string label) in s_rows)
            {
                if (!values.TryGetValue((baseLabel, kind, speed), out SortedDictionary<int, double>? old)
                    || !values.TryGetValue((testLabel, kind, speed), out SortedDictionary<int, double>? now))
                {
                    continue;
                }

                double oldMedian = Harness.Median([.. old.Values]);
                double newMedian = Harness.Median([.. now.Values]);
                double[] perRound = [.. old.Keys.Where(now.ContainsKey).Select(r => now[r] / old[r])];
                string range = perRound.Length == 0 ? "" : string.Create(CultureInfo.InvariantCulture, $"{perRound.Min():F3}–{perRound.Max():F3}");
                string items = speed.StartsWith("build", StringComparison.Ordinal) && values.TryGetValue((testLabel, kind, "build_items"), out var n)
                    ? string.Create(CultureInfo.InvariantCulture, $" on {n.Values.First():N0}") : "";
                Console.WriteLine(string.Create(
                    CultureInfo.InvariantCulture,
                    $"| {kind} | {label}{items} | {oldMedian:N1} | {newMedian:N1} | {newMedian / oldMedian:F3} | {range} | {RecallText(values, baseLabel, kind, recall)} | {RecallText(values, testLabel, kind, recall)} |"));
            }
        }

        var hashes = values.Where(e => e.Key.Item3 == "truth_hash").SelectMany(e => e.Value.Values).Distinct().ToArray();
        Console.WriteLine();
        Console.WriteLine(hashes.Length switch
        {
            0 => "exact ground truth: no hash recorded",
            1 => "exact ground truth: identical ids in every run of both versions (the exact index's recall is 1 by definition)",
            _ => "exact ground truth: DIFFERS between runs (the exact index's answers changed; each run's recall is against its own truth)",
        });
        return 0;
    }

    private static string RecallText(Dictionary<(string, string, string), SortedDictionary<int, double>> values, string label, string kind, string measure)
    {
        // The exact index's build has no recall check of its own: it is the truth, so its batch recall stands in.
        if (!values.TryGetValue((label, kind, measure), out SortedDictionary<int, double>? recall)
            && !values.TryGetValue((label, kind, "batch_recall"), out recall))
        {
            return "";
        }

        return Harness.Median([.. recall.Values]).ToString("F4", CultureInfo.InvariantCulture);
    }

    private static string StripK(string measure)
    {
        int at = measure.IndexOf('@', StringComparison.Ordinal);
        return at < 0 ? measure : measure[..at];
    }
}

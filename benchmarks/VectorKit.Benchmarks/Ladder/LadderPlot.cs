using System.Globalization;

namespace VectorKit.Benchmarks.Ladder;

/// <summary>
/// The ladder's plot: single-thread queries/s against rows, both on log scales, as the command-line tool draws its
/// curves. Rungs of another dimension (the 10⁸ × 64 rung) are drawn as separate markers, not joined to the lines.
/// </summary>
internal static class LadderPlot
{
    public static void Draw(IReadOnlyList<(long Count, int Dimension, LadderResult Result)> all, int dimension, string path)
    {
        var results = all.Where(x => x.Dimension == dimension).Select(x => (x.Count, x.Result)).ToList();
        var plot = new ScottPlot.Plot();
        var series = new (string Label, string Kind, double Target)[]
        {
            ("exact scan (recall 1)", "exact", 1.0),
            ("8-bit graph, recall@10 ≥ 0.90", "graph-8bit", 0.90),
            ("8-bit graph, recall@10 ≥ 0.95", "graph-8bit", 0.95),
            ("inverted file + product codes + re-scoring, ≥ 0.90", "ivf-pq", 0.90),
            ("inverted file + product codes + re-scoring, ≥ 0.95", "ivf-pq", 0.95),
            ("inverted file + 4-bit fast scan + re-scoring, ≥ 0.90", "ivf-fastscan", 0.90),
            ("inverted file + 4-bit fast scan + re-scoring, ≥ 0.95", "ivf-fastscan", 0.95),
        };
        foreach ((string label, string kind, double target) in series)
        {
            var xs = new List<double>();
            var ys = new List<double>();
            foreach ((long count, LadderResult r) in results.Where(x => x.Result.Kind == kind).OrderBy(x => x.Count))
            {
                LadderPoint? p = r.Cheapest(target);
                if (p is not null)
                {
                    xs.Add(Math.Log10(count));
                    ys.Add(Math.Log10(Math.Max(p.QueriesPerSecond, 1e-3)));
                }
            }

            if (xs.Count == 0)
            {
                continue;
            }

            var line = plot.Add.Scatter(xs.ToArray(), ys.ToArray());
            line.LegendText = label;
            line.LineWidth = 2;
            line.MarkerSize = 7;
        }

        foreach ((long count, int d, LadderResult r) in all.Where(x => x.Dimension != dimension))
        {
            foreach (double target in r.Kind == "exact" ? [1.0] : new[] { 0.90, 0.95 })
            {
                if (r.Cheapest(target) is not { } p)
                {
                    continue;
                }

                var marker = plot.Add.Scatter(new[] { Math.Log10(count) }, new[] { Math.Log10(Math.Max(p.QueriesPerSecond, 1e-3)) });
                marker.LegendText = string.Create(CultureInfo.InvariantCulture, $"{r.Kind} at × {d} (full vectors read from disk), {(r.Kind == "exact" ? "recall 1" : $"≥ {target:F2}")}");
                marker.LineWidth = 0;
                marker.MarkerSize = 11;
                marker.MarkerShape = r.Kind == "exact" ? ScottPlot.MarkerShape.OpenSquare : ScottPlot.MarkerShape.OpenDiamond;
            }
        }

        // Log scales: the lines run through log10 values and the ticks are labelled back.
        plot.Axes.Left.TickGenerator = new ScottPlot.TickGenerators.NumericAutomatic
        {
            MinorTickGenerator = new ScottPlot.TickGenerators.LogMinorTickGenerator(),
            IntegerTicksOnly = true,
            LabelFormatter = y => Math.Pow(10, y).ToString("N0", CultureInfo.InvariantCulture),
        };
        plot.Axes.Bottom.TickGenerator = new ScottPlot.TickGenerators.NumericAutomatic
        {
            IntegerTicksOnly = true,
            LabelFormatter = x => $"10^{x:F0}",
        };
        plot.Title($"Ladder: clustered data × {dimension}, single-thread queries/s at recall@10 targets");
        plot.XLabel("rows (log scale)");
        plot.YLabel("queries/s, 1 thread (log scale)");
        plot.ShowLegend(ScottPlot.Alignment.LowerLeft);
        plot.SavePng(path, 1000, 650);
    }
}

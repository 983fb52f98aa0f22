using FsCheck;
using FsCheck.Xunit;
using VectorKit.Indexes;
using VectorKit.Tuning;

namespace VectorKit.Tests.Tuning;

/// <summary>
/// The tuning's search over settings and its choice, run against synthetic recall and cost curves whose cheapest
/// setting meeting the target is found independently by enumerating every setting.
/// </summary>
public class SettingSelectionTests
{
    private const double Target = 0.9;

    // A model index: a setting meets the target when its width reaches a threshold that falls with the depth by
    // non-increasing steps (diminishing returns), then stays flat; its cost is linear in width and depth.
    private sealed record Model(int K, int MaxWidth, bool WidthCoversDepth, int[] Thresholds, double WidthCost, double DepthCost)
    {
        // The tuning's depths, the i-th of which has threshold Thresholds[min(i, last)].
        public int Threshold(int depth, IReadOnlyList<int> depths) => Thresholds[Math.Min(depths.ToList().IndexOf(depth), Thresholds.Length - 1)];

        // The narrowest width the tuning tries at a depth.
        public int Low(int depth) => WidthCoversDepth ? Math.Min(Math.Max(K, depth), MaxWidth) : 1;

        public bool MeetsAt(int width, int depth, IReadOnlyList<int> depths) => width >= Threshold(depth, depths);

        // Rising towards the threshold by more than the plateau test's gain per doubling, Target from it on.
        public double RecallAt(int width, int depth, IReadOnlyList<int> depths)
            => MeetsAt(width, depth, depths) ? Target : 0.5 + (0.39 * Math.Sqrt((double)width / Threshold(depth, depths)));

        public double Cost(int width, int depth) => (WidthCost * width) + (DepthCost * depth);
    }

    // FsCheck gives the seed; the model's parameters are drawn from it over their whole ranges (FsCheck's own sizes stay small).
    [Property(MaxTest = 500)]
    public bool TheChoiceIsTheCheapestSettingOfAFullEnumeration(int seed, bool coversDepth)
    {
        var random = new Random(seed);
        int k = random.Next(1, 21);
        int maxWidth = random.Next(1, 600);
        int first = random.Next(1, maxWidth + 1);

        // Non-increasing drops of the threshold from one depth to the next, then flat.
        int[] drops = Enumerable.Range(0, random.Next(6)).Select(_ => random.Next(first)).OrderByDescending(v => v).ToArray();
        var thresholds = new List<int> { first };
        foreach (int drop in drops)
        {
            thresholds.Add(Math.Max(1, thresholds[^1] - drop));
        }

        var model = new Model(k, maxWidth, coversDepth, thresholds.ToArray(), random.Next(1, 100), random.Next(50) / 10.0);
        int count = 100_000;
        var knobs = new SearchKnobs(maxWidth, 16, coversDepth, Rescores: true, DefaultDepth: k);
        int[] depths = RecallTuning.Depths(true, k, Math.Min(VectorIndexOptions.MaxRescoreDepth, count)).Select(d => d!.Value).ToArray();

        var curve = new List<TuningPoint>();
        RecallTuning.SearchSettings(knobs, count, k, (w, d) =>
        {
            double recall = model.RecallAt(w!.Value, d!.Value, depths);
            var p = new TuningPoint(w, d, recall, recall, recall, model.Cost(w.Value, d.Value));
            curve.Add(p);
            return p;
        }, p => p.RecallLow >= Target);
        (TuningPoint chosen, bool met) = RecallTuning.Choose(curve, p => p.RecallLow >= Target);

        // Every width at every depth of the tuning's grid.
        double cheapest = double.PositiveInfinity;
        foreach (int depth in depths)
        {
            for (int width = model.Low(depth); width <= maxWidth; width++)
            {
                if (model.MeetsAt(width, depth, depths))
                {
                    cheapest = Math.Min(cheapest, model.Cost(width, depth));
                    break;
                }
            }
        }

        return met && model.MeetsAt(chosen.SearchWidth!.Value, chosen.RescoreDepth!.Value, depths) && model.Cost(chosen.SearchWidth.Value, chosen.RescoreDepth.Value) == cheapest;
    }

    [Property(MaxTest = 500)]
    public bool WithoutDepth_TheChosenWidthIsTheSmallestThatMeetsTheTarget_InLogarithmicallyManySteps(int seed)
    {
        var random = new Random(seed);
        int maxWidth = random.Next(1, 4097);
        int threshold = random.Next(1, maxWidth + 1);
        var knobs = new SearchKnobs(maxWidth, 16, WidthCoversDepth: false, Rescores: false, DefaultDepth: 0);
        var curve = new List<TuningPoint>();
        RecallTuning.SearchSettings(knobs, 1_000_000, 10, (w, d) =>
        {
            double recall = w >= threshold ? 1.0 : 0.5 + (0.49 * Math.Sqrt((double)w!.Value / threshold));
            var p = new TuningPoint(w, d, recall, recall, recall, w!.Value);
            curve.Add(p);
            return p;
        }, p => p.RecallLow >= 0.99);
        (TuningPoint chosen, _) = RecallTuning.Choose(curve, p => p.RecallLow >= 0.99);
        int steps = 2 * ((int)Math.Ceiling(Math.Log2(maxWidth)) + 1);
        return chosen.SearchWidth == threshold && chosen.RescoreDepth is null && curve.Count <= steps;
    }

    [Fact]
    public void DepthsAtMostK_AreNotTried_SinceTheyReturnTheSetOfNoRescoring()
    {
        Assert.Equal([0, 20, 40, 80, 160], RecallTuning.Depths(true, 10, 200).Select(d => d!.Value));
        Assert.Equal([null], RecallTuning.Depths(false, 10, 200));
    }

    [Fact]
    public void TheFront_KeepsOnlySettingsNoOtherNeedsLessOfBothKnobsThan()
    {
        TuningPoint P(int? w, int? d, double low) => new(w, d, low, low, low, 1);
        TuningPoint[] curve =
        [
            P(4, 0, 0.96), P(3, 0, 0.94), P(2, 20, 0.95), P(3, 20, 0.97), P(2, 40, 0.96), P(1, 40, 0.93), P(2, 20, 0.96),
        ];
        List<int> front = RecallTuning.Front(curve, p => p.RecallLow >= 0.95);
        Assert.Equal([0, 2], front);

        // The exact index: no width, and any depth that meets the target beats the deeper ones.
        TuningPoint[] exact = [P(null, 0, 0.94), P(null, 20, 0.95), P(null, 40, 0.97)];
        Assert.Equal([1], RecallTuning.Front(exact, p => p.RecallLow >= 0.95));
    }

    // Timings: each candidate's true cost times a jitter of under 5 %, and on at most three of seven rounds a spike of up
    // to 4x (another process's work). The medians must rank the truly cheapest first when costs differ by 25 % or more.
    [Property(MaxTest = 300)]
    public bool TheRunoffsMedians_PickTheTrulyCheapest_DespiteSpikesInUnderHalfTheRounds(int seed)
    {
        var random = new Random(seed);
        int count = random.Next(2, 7);
        double scale = 1 + (99 * random.NextDouble());
        double[] cost = Enumerable.Range(0, count).Select(i => scale * Math.Pow(1.25, i)).ToArray();
        random.Shuffle(cost);
        const int Rounds = 7;
        bool[][] spiked = Enumerable.Range(0, count).Select(_ =>
        {
            bool[] mask = new bool[Rounds];
            foreach (int r in Enumerable.Range(0, Rounds).OrderBy(_ => random.Next()).Take(random.Next(4)))
            {
                mask[r] = true;
            }

            return mask;
        }).ToArray();
        int[] calls = new int[count];
        double[] medians = RecallTuning.Runoff(count, Rounds, i =>
        {
            int round = calls[i]++;
            double t = cost[i] * (1 + (0.05 * random.NextDouble()));
            return spiked[i][round] ? t * (1 + (3 * random.NextDouble())) : t;
        });

        int trulyCheapest = Array.IndexOf(cost, cost.Min());
        int chosen = Array.IndexOf(medians, medians.Min());
        return chosen == trulyCheapest && calls.All(c => c == Rounds);
    }
}

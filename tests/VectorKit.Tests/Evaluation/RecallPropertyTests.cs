using FsCheck;
using FsCheck.Xunit;
using VectorKit.Evaluation;

namespace VectorKit.Tests.Evaluation;

public class RecallPropertyTests
{
    [Property(MaxTest = 300)]
    public bool RecallIsBetweenZeroAndOne(int[][] truthRows, int[][] foundRows, PositiveInt k)
    {
        (long[][] truth, long[][] found) = Shape(truthRows, foundRows);
        double recall = Recall.AtK(truth, found, k.Get);
        return recall is >= 0.0 and <= 1.0;
    }

    [Property(MaxTest = 300)]
    public bool ResultsEqualToTheTruthScoreOne(int[][] truthRows, PositiveInt k)
    {
        (long[][] truth, _) = Shape(truthRows, []);
        long[][] copy = truth.Select(row => row.ToArray()).ToArray();
        return Recall.AtK(truth, copy, k.Get) == 1.0;
    }

    [Property(MaxTest = 300)]
    public bool RecallMatchesAHashSetReference(int[][] truthRows, int[][] foundRows, PositiveInt k)
    {
        (long[][] truth, long[][] found) = Shape(truthRows, foundRows);
        double expected = truth.Select((row, q) =>
        {
            var want = row.Take(k.Get).ToHashSet();
            return want.Count == 0 ? 1.0 : (double)found[q].Take(k.Get).ToHashSet().Count(want.Contains) / want.Count;
        }).Average();
        return Math.Abs(Recall.AtK(truth, found, k.Get) - expected) < 1e-12;
    }

    // At least one query; truth rows distinct ids (as ground truth always is); found rows as many as truth rows, any ids.
    // Small id values make overlaps between the two sides likely.
    private static (long[][] Truth, long[][] Found) Shape(int[][] truthRows, int[][] foundRows)
    {
        truthRows = truthRows is { Length: > 0 } ? truthRows : [[]];
        long[][] truth = truthRows.Select(row => (row ?? []).Select(v => (long)(v % 20)).Distinct().ToArray()).ToArray();
        long[][] found = truth.Select((_, q) => q < foundRows.Length && foundRows[q] is not null
            ? foundRows[q].Select(v => (long)(v % 20)).ToArray()
            : []).ToArray();
        return (truth, found);
    }
}

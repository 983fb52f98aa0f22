using MathNet.Numerics.Distributions;
using VectorKit.Evaluation;

namespace VectorKit.Tests.Evaluation;

public class RecallStatisticsTests
{
    [Theory]
    [InlineData(1e-9)]
    [InlineData(0.001)]
    [InlineData(0.02)]
    [InlineData(0.025)]
    [InlineData(0.3)]
    [InlineData(0.5)]
    [InlineData(0.9)]
    [InlineData(0.975)]
    [InlineData(0.995)]
    [InlineData(0.99999)]
    public void NormalQuantile_MatchesMathNet(double p)
    {
        // Reference: MathNet.Numerics Normal.InvCDF (double precision).
        double expected = Normal.InvCDF(0, 1, p);
        Assert.Equal(expected, RecallStatistics.NormalQuantile(p), 1e-8 * Math.Max(1, Math.Abs(expected)));
    }

    [Fact]
    public void TwoSidedZ_IsTheFamiliarValue() => Assert.Equal(1.959964, RecallStatistics.TwoSidedZ(0.95), 5); // common practice: 1.96 at 95 %

    [Theory]
    [InlineData(0.9, 50)]
    [InlineData(1.0, 30)]
    [InlineData(0.0, 30)]
    [InlineData(0.37, 263)]
    public void Wilson_EndsAreWhereTheScoreTestJustAccepts(double p, double n)
    {
        // The Wilson interval is the set of π with |p − π| ≤ z √(π(1 − π)/n) (inverting the score test). Find its
        // ends by bisection on that definition, independently of the closed form.
        double z = RecallStatistics.TwoSidedZ(0.95);
        (double low, double high) = RecallStatistics.Wilson(p, n, z);
        bool Inside(double pi) => Math.Abs(p - pi) <= z * Math.Sqrt(pi * (1 - pi) / n);
        double Edge(double inside, double outside)
        {
            for (int i = 0; i < 200; i++)
            {
                double mid = (inside + outside) / 2;
                if (Inside(mid))
                {
                    inside = mid;
                }
                else
                {
                    outside = mid;
                }
            }

            return inside;
        }

        double expectedLow = p == 0 ? 0 : Edge(p, 0);
        double expectedHigh = p == 1 ? 1 : Edge(p, 1);
        Assert.Equal(expectedLow, low, 9);
        Assert.Equal(expectedHigh, high, 9);
    }

    [Theory]
    [InlineData(0.95, 0.95, 0.05)]
    [InlineData(0.9, 0.99, 0.02)]
    [InlineData(1.0, 0.95, 0.05)]
    [InlineData(0.5, 0.8, 0.1)]
    public void RequiredQueries_IsTheSmallestCountMeetingTheWidth(double target, double confidence, double width)
    {
        double z = RecallStatistics.TwoSidedZ(confidence);
        int n = RecallStatistics.RequiredQueries(target, z, width);
        Assert.True(RecallStatistics.WilsonHalfWidth(target, n, z) <= width);
        Assert.True(n == 1 || RecallStatistics.WilsonHalfWidth(target, n - 1, z) > width);
    }

    [Fact]
    public void Estimate_UsesQueriesAsTrialsWhenTheirItemsMoveTogether_AndMoreWhenIndependent()
    {
        double z = RecallStatistics.TwoSidedZ(0.95);

        // Every query finds all or nothing: k = 10 items per query carry one query's worth of information.
        int[] allOrNothing = Enumerable.Range(0, 100).Select(i => i % 5 == 0 ? 0 : 10).ToArray();
        (double mean, double low, double high) = RecallStatistics.Estimate(allOrNothing, 10, z);
        Assert.Equal(0.8, mean, 12);
        (double wl, double wh) = RecallStatistics.Wilson(0.8, 100, z);
        Assert.Equal(wl, low, 12);
        Assert.Equal(wh, high, 12);

        // Every query finds 8 of 10 (no variation between queries): the conservative end again.
        (_, double low2, _) = RecallStatistics.Estimate(Enumerable.Repeat(8, 100).ToArray(), 10, z);
        Assert.Equal(wl, low2, 12);

        // Binomial-like spread: the effective trials exceed the query count, so the interval narrows.
        var random = new Random(5);
        int[] binomial = Enumerable.Range(0, 100).Select(_ => Enumerable.Range(0, 10).Count(_ => random.NextDouble() < 0.8)).ToArray();
        (double m3, double l3, double h3) = RecallStatistics.Estimate(binomial, 10, z);
        Assert.True(h3 - l3 < (RecallStatistics.Wilson(m3, 100, z).High - RecallStatistics.Wilson(m3, 100, z).Low) * 0.7);
    }
}

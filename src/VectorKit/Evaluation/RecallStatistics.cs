namespace VectorKit.Evaluation;

/// <summary>
/// The sampling uncertainty of a recall estimated on a sample of queries: Wilson score intervals on an effective
/// number of trials, the normal quantile they need, and the sample size a requested precision needs.
/// </summary>
/// <remarks>
/// <para>Recall@k averages, over queries, the fraction of each query's true top k that was found. The k items of one
/// query are not independent trials (a hard query loses several), so the interval uses an effective number of trials
/// between the number of queries (items of a query entirely correlated) and queries × k (independent): the design
/// effect of cluster sampling, <c>n_eff = p(1 − p) / Var(mean)</c> with Var(mean) the per-query sample variance over
/// n (Kish, <i>Survey Sampling</i>, 1965, from memory). With no variation between queries the conservative end, the
/// number of queries, is used.</para>
/// <para>Wilson score interval (Wilson, JASA 22:209–212, 1927; as presented by Agresti &amp; Coull, The American
/// Statistician 52:119–126, 1998, from memory): centre <c>(p + z²/2n) / (1 + z²/n)</c>, half-width
/// <c>z √(p(1 − p)/n + z²/4n²) / (1 + z²/n)</c>. Unlike the plain normal interval it stays inside [0, 1] and does not
/// collapse to zero width when every query is perfect.</para>
/// </remarks>
internal static class RecallStatistics
{
    /// <summary>The standard normal quantile for a two-sided confidence level: z with P(|Z| ≤ z) = confidence.</summary>
    public static double TwoSidedZ(double confidence) => NormalQuantile(1.0 - ((1.0 - confidence) / 2.0));

    /// <summary>
    /// The inverse of the standard normal distribution function, by P. J. Acklam's rational approximation (relative
    /// error below 1.2 × 10⁻⁹; coefficients from memory, checked against MathNet.Numerics in the tests).
    /// </summary>
    public static double NormalQuantile(double p)
    {
        if (!(p > 0 && p < 1))
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(p), p, "must be in (0, 1)");
        }

        const double PLow = 0.02425;
        ReadOnlySpan<double> a = [-3.969683028665376e+01, 2.209460984245205e+02, -2.759285104469687e+02, 1.383577518672690e+02, -3.066479806614716e+01, 2.506628277459239e+00];
        ReadOnlySpan<double> b = [-5.447609879822406e+01, 1.615858368580409e+02, -1.556989798598866e+02, 6.680131188771972e+01, -1.328068155288572e+01];
        ReadOnlySpan<double> c = [-7.784894002430293e-03, -3.223964580411365e-01, -2.400758277161838e+00, -2.549732539343734e+00, 4.374664141464968e+00, 2.938163982698783e+00];
        ReadOnlySpan<double> d = [7.784695709041462e-03, 3.224671290700398e-01, 2.445134137142996e+00, 3.754408661907416e+00];
        if (p < PLow)
        {
            double q = Math.Sqrt(-2 * Math.Log(p));
            return (((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) / ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1);
        }

        if (p > 1 - PLow)
        {
            double q = Math.Sqrt(-2 * Math.Log(1 - p));
            return -(((((c[0] * q + c[1]) * q + c[2]) * q + c[3]) * q + c[4]) * q + c[5]) / ((((d[0] * q + d[1]) * q + d[2]) * q + d[3]) * q + 1);
        }

        double r = p - 0.5;
        double s = r * r;
        return (((((a[0] * s + a[1]) * s + a[2]) * s + a[3]) * s + a[4]) * s + a[5]) * r / (((((b[0] * s + b[1]) * s + b[2]) * s + b[3]) * s + b[4]) * s + 1);
    }

    /// <summary>The Wilson score interval for a proportion <paramref name="p"/> observed over <paramref name="trials"/> trials.</summary>
    public static (double Low, double High) Wilson(double p, double trials, double z)
    {
        double z2n = z * z / trials;
        double centre = (p + (z2n / 2)) / (1 + z2n);
        double half = z * Math.Sqrt((p * (1 - p) / trials) + (z2n / (4 * trials))) / (1 + z2n);
        return (Math.Max(0, centre - half), Math.Min(1, centre + half));
    }

    /// <summary>The Wilson half-width at proportion <paramref name="p"/> over <paramref name="trials"/> trials.</summary>
    public static double WilsonHalfWidth(double p, double trials, double z)
    {
        double z2n = z * z / trials;
        return z * Math.Sqrt((p * (1 - p) / trials) + (z2n / (4 * trials))) / (1 + z2n);
    }

    /// <summary>
    /// The fewest queries whose Wilson interval at recall <paramref name="target"/>, counting each query as one trial
    /// (the conservative end), is no wider than ± <paramref name="maxHalfWidth"/>.
    /// </summary>
    public static int RequiredQueries(double target, double z, double maxHalfWidth)
    {
        // The half-width falls as n grows: double, then bisect.
        int high = 1;
        while (WilsonHalfWidth(target, high, z) > maxHalfWidth)
        {
            if (high > int.MaxValue / 2)
            {
                return int.MaxValue;
            }

            high *= 2;
        }

        int low = high / 2;
        while (low + 1 < high)
        {
            int mid = low + ((high - low) / 2);
            if (WilsonHalfWidth(target, mid, z) > maxHalfWidth)
            {
                low = mid;
            }
            else
            {
                high = mid;
            }
        }

        return high;
    }

    /// <summary>
    /// Mean recall over queries with its interval: <paramref name="found"/>[q] of <paramref name="perQuery"/> true
    /// items found for query q.
    /// </summary>
    public static (double Mean, double Low, double High) Estimate(ReadOnlySpan<int> found, int perQuery, double z)
    {
        int n = found.Length;
        if (n == 0 || perQuery == 0)
        {
            return (double.NaN, double.NaN, double.NaN);
        }

        // Integer sums, so that queries that all found the same number give a variance of exactly zero.
        long sum = 0;
        long squares = 0;
        for (int i = 0; i < n; i++)
        {
            sum += found[i];
            squares += (long)found[i] * found[i];
        }

        double mean = sum / ((double)n * perQuery);
        long spread = (n * squares) - (sum * sum);   // n² × the population variance of the counts
        double trials = n;
        if (spread > 0 && n > 1)
        {
            double variance = spread / ((double)n * (n - 1) * perQuery * perQuery);
            trials = Math.Clamp(mean * (1 - mean) * n / variance, n, (double)n * perQuery);
        }

        (double low, double high) = Wilson(mean, trials, z);
        return (mean, low, high);
    }
}

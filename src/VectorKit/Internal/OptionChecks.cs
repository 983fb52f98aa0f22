namespace VectorKit.Internal;

/// <summary>
/// The checks options classes run in their <c>init</c> accessors: one place for each rule and its message, so the
/// same kind of option is validated alike everywhere.
/// </summary>
internal static class OptionChecks
{
    /// <summary>A thread count: -1 for one per core, or positive.</summary>
    public static int Parallelism(int value, string name)
    {
        if (value == 0 || value < -1)
        {
            ThrowHelper.ThrowArgumentOutOfRange(name, value, "must be -1 (all cores) or a positive thread count");
        }

        return value;
    }

    /// <summary>A value in [<paramref name="minimum"/>, <paramref name="maximum"/>].</summary>
    public static int InRange(int value, int minimum, int maximum, string name)
    {
        if (value < minimum || value > maximum)
        {
            ThrowHelper.ThrowArgumentOutOfRange(name, value, $"must be in [{minimum}, {maximum}]");
        }

        return value;
    }

    /// <summary>A value of 0 or more.</summary>
    public static int NonNegative(int value, string name)
    {
        if (value < 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(name, value, "must be zero or positive");
        }

        return value;
    }

    /// <summary>A value of 1 or more.</summary>
    public static int Positive(int value, string name)
    {
        if (value < 1)
        {
            ThrowHelper.ThrowArgumentOutOfRange(name, value, "must be positive");
        }

        return value;
    }

    /// <summary>A fraction strictly between 0 and 1 (a confidence level, a held-out share); NaN fails.</summary>
    public static double OpenUnitInterval(double value, string name)
    {
        if (!(value > 0 && value < 1))
        {
            ThrowHelper.ThrowArgumentOutOfRange(name, value, "must be in (0, 1)");
        }

        return value;
    }

    /// <summary>A recall target: above 0, at most 1; NaN fails.</summary>
    public static double Recall(double value, string name)
    {
        if (!(value > 0 && value <= 1))
        {
            ThrowHelper.ThrowArgumentOutOfRange(name, value, "must be in (0, 1]");
        }

        return value;
    }
}

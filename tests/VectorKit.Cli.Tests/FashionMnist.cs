namespace VectorKit.Cli.Tests;

/// <summary>
/// Where Fashion-MNIST (Xiao, Rasul &amp; Vollgraf 2017, arXiv:1708.07747) lives: <c>VECTORKIT_FASHION_MNIST</c>, else
/// where the Debian package <c>dataset-fashion-mnist</c> installs it.
/// </summary>
internal static class FashionMnist
{
    public static string Directory
        => Environment.GetEnvironmentVariable("VECTORKIT_FASHION_MNIST") is { Length: > 0 } dir ? dir : "/usr/share/datasets/fashion-mnist";

    public static string TrainImages => Path.Combine(Directory, "train-images-idx3-ubyte.gz");

    public static string TrainLabels => Path.Combine(Directory, "train-labels-idx1-ubyte.gz");

    public static string TestImages => Path.Combine(Directory, "t10k-images-idx3-ubyte.gz");

    public static string TestLabels => Path.Combine(Directory, "t10k-labels-idx1-ubyte.gz");

    public static bool IsAvailable => new[] { TrainImages, TrainLabels, TestImages, TestLabels }.All(File.Exists);

    /// <summary>Under CI=true a missing data set fails the run instead of skipping.</summary>
    public static bool IsRequired => string.Equals(Environment.GetEnvironmentVariable("CI"), "true", StringComparison.OrdinalIgnoreCase);
}

/// <summary>A fact that needs Fashion-MNIST: skipped when it is missing, except under CI=true, where it runs and fails.</summary>
[AttributeUsage(AttributeTargets.Method, AllowMultiple = false)]
public sealed class DataFactAttribute : FactAttribute
{
    public DataFactAttribute()
    {
        if (!FashionMnist.IsAvailable && !FashionMnist.IsRequired)
        {
            Skip = $"Fashion-MNIST was not found in '{FashionMnist.Directory}' (Debian package dataset-fashion-mnist).";
        }
    }
}

using VectorKit.IO;

namespace VectorKit.Tests.TestData;

/// <summary>
/// Locates and loads the Fashion-MNIST data set (Xiao, Rasul &amp; Vollgraf 2017, arXiv:1708.07747) once per test run.
/// </summary>
/// <remarks>
/// The directory is <c>VECTORKIT_FASHION_MNIST</c> when set, else where the Debian package
/// <c>dataset-fashion-mnist</c> installs it. Tests using it are marked <see cref="DataFactAttribute"/>: they are
/// skipped when the files are missing, except under <c>CI=true</c>, where the loaders throw instead so the run fails.
/// </remarks>
public static class FashionMnist
{
    public const string DirectoryVariable = "VECTORKIT_FASHION_MNIST";
    public const string DebianDirectory = "/usr/share/datasets/fashion-mnist";
    public const string TrainImagesFile = "train-images-idx3-ubyte.gz";
    public const string TrainLabelsFile = "train-labels-idx1-ubyte.gz";
    public const string TestImagesFile = "t10k-images-idx3-ubyte.gz";
    public const string TestLabelsFile = "t10k-labels-idx1-ubyte.gz";

    private static readonly Lazy<VectorSet> s_trainImages = new(() => IdxFile.ReadVectors(PathOf(TrainImagesFile)));
    private static readonly Lazy<int[]> s_trainLabels = new(() => IdxFile.ReadLabels(PathOf(TrainLabelsFile)));
    private static readonly Lazy<VectorSet> s_testImages = new(() => IdxFile.ReadVectors(PathOf(TestImagesFile)));
    private static readonly Lazy<int[]> s_testLabels = new(() => IdxFile.ReadLabels(PathOf(TestLabelsFile)));

    /// <summary>The directory searched for the four gzip files.</summary>
    public static string Directory
        => Environment.GetEnvironmentVariable(DirectoryVariable) is { Length: > 0 } dir ? dir : DebianDirectory;

    /// <summary>Whether all four files are present.</summary>
    public static bool IsAvailable
        => new[] { TrainImagesFile, TrainLabelsFile, TestImagesFile, TestLabelsFile }.All(f => File.Exists(System.IO.Path.Combine(Directory, f)));

    /// <summary>Whether missing data must fail the run rather than skip (CI=true).</summary>
    public static bool IsRequired
        => string.Equals(Environment.GetEnvironmentVariable("CI"), "true", StringComparison.OrdinalIgnoreCase);

    /// <summary>The message used both to skip and to fail.</summary>
    public static string MissingMessage
        => $"Fashion-MNIST was not found in '{Directory}'. Install the Debian package dataset-fashion-mnist, or set {DirectoryVariable} to a directory holding the four idx .gz files.";

    /// <summary>60 000 training images of 28 × 28 = 784 pixel values 0..255.</summary>
    public static VectorSet TrainImages => Load(s_trainImages);

    /// <summary>60 000 training labels 0..9.</summary>
    public static int[] TrainLabels => Load(s_trainLabels);

    /// <summary>10 000 test images of 784 pixel values 0..255.</summary>
    public static VectorSet TestImages => Load(s_testImages);

    /// <summary>10 000 test labels 0..9.</summary>
    public static int[] TestLabels => Load(s_testLabels);

    /// <summary>The full path of one of the data files.</summary>
    public static string PathOf(string fileName)
    {
        EnsureAvailable();
        return System.IO.Path.Combine(Directory, fileName);
    }

    private static T Load<T>(Lazy<T> value)
    {
        EnsureAvailable();
        return value.Value;
    }

    private static void EnsureAvailable()
    {
        if (!IsAvailable)
        {
            throw new InvalidOperationException(MissingMessage);
        }
    }
}

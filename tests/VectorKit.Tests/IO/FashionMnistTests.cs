using VectorKit.IO;
using VectorKit.Tests.TestData;
using Xunit;

namespace VectorKit.Tests.IO;

/// <summary>
/// Reads the real Fashion-MNIST files and checks them against the data set's published description
/// (Xiao, Rasul &amp; Vollgraf 2017, arXiv:1708.07747): 60 000 training and 10 000 test 28×28 greyscale images,
/// 10 classes, 6 000 training and 1 000 test images per class.
/// </summary>
[Trait("Category", "Data")]
public sealed class FashionMnistTests
{
    [DataFact]
    public void Training_images_are_60000_vectors_of_784_pixels_in_0_to_255()
    {
        VectorSet images = FashionMnist.TrainImages;
        Assert.Equal(60000, images.Count);
        Assert.Equal(28 * 28, images.Dimension);
        AssertPixels(images);
    }

    [DataFact]
    public void Test_images_are_10000_vectors_of_784_pixels_in_0_to_255()
    {
        VectorSet images = FashionMnist.TestImages;
        Assert.Equal(10000, images.Count);
        Assert.Equal(784, images.Dimension);
        AssertPixels(images);
    }

    [DataFact]
    public void Each_class_has_6000_training_and_1000_test_labels()
    {
        Assert.Equal(60000, FashionMnist.TrainLabels.Length);
        Assert.Equal(10000, FashionMnist.TestLabels.Length);
        Assert.All(FashionMnist.TrainLabels, l => Assert.InRange(l, 0, 9));
        Assert.All(FashionMnist.TestLabels, l => Assert.InRange(l, 0, 9));
        Assert.All(FashionMnist.TrainLabels.CountBy(l => l), g => Assert.Equal(6000, g.Value));
        Assert.All(FashionMnist.TestLabels.CountBy(l => l), g => Assert.Equal(1000, g.Value));
        Assert.Equal(10, FashionMnist.TrainLabels.Distinct().Count());
    }

    [DataFact]
    public void First_training_label_is_ankle_boot()
    {
        // From memory: the first training image is an ankle boot, class 9.
        Assert.Equal(9, FashionMnist.TrainLabels[0]);
    }

    [DataFact]
    public void Streaming_the_gzip_file_in_blocks_matches_the_whole_read()
    {
        using IdxReader reader = IdxReader.Open(FashionMnist.PathOf(FashionMnist.TestImagesFile));
        Assert.True(reader.IsCompressed);
        Assert.Equal([10000, 28, 28], reader.Shape);
        VectorSet whole = FashionMnist.TestImages;
        int row = 0;
        foreach (VectorSet block in reader.ReadBlocks(999))
        {
            Assert.True(block.Data.AsSpan().SequenceEqual(whole.Data.AsSpan(row * 784, block.Data.Length)));
            row += block.Count;
        }

        Assert.Equal(10000, row);
    }

    private static void AssertPixels(VectorSet images)
    {
        float min = float.MaxValue, max = float.MinValue;
        int fractional = 0;
        foreach (float v in images.Data)
        {
            fractional += MathF.Floor(v) == v ? 0 : 1; // raw byte values, not scaled
            min = MathF.Min(min, v);
            max = MathF.Max(max, v);
        }

        Assert.Equal(0, fractional);
        Assert.Equal(0f, min);
        Assert.InRange(max, 1f, 255f);
    }
}

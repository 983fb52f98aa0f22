using System.IO.Compression;

namespace VectorKit.Benchmarks;

/// <summary>Benchmark inputs: seeded random vectors, and the Fashion-MNIST images when the system has them.</summary>
public static class TestData
{
    /// <summary>
    /// The folder holding Fashion-MNIST's idx3 files (gzip): <c>VECTORKIT_FASHION_MNIST</c> if set, else where the
    /// Debian package dataset-fashion-mnist installs them.
    /// </summary>
    public static readonly string FashionDirectory =
        Environment.GetEnvironmentVariable("VECTORKIT_FASHION_MNIST") ?? "/usr/share/datasets/fashion-mnist";

    public static string FashionTrainImages => Path.Combine(FashionDirectory, "train-images-idx3-ubyte.gz");

    public static string FashionTestImages => Path.Combine(FashionDirectory, "t10k-images-idx3-ubyte.gz");

    public const int ImageDimension = 28 * 28;

    /// <summary>Uniform values in [−1, 1), never all zero, reproducible from <paramref name="seed"/>.</summary>
    public static float[] Random(int count, int seed)
    {
        var random = new Random(seed);
        var values = new float[count];
        for (int i = 0; i < values.Length; i++)
        {
            values[i] = (float)((random.NextDouble() * 2) - 1);
        }

        return values;
    }

    /// <summary>
    /// The first <paramref name="count"/> images of an idx3 file as 784 floats each (pixel / 255), or seeded random
    /// values of the same shape when the file is missing; <paramref name="source"/> says which.
    /// </summary>
    public static float[] Images(string path, int count, int seed, out string source)
    {
        if (!File.Exists(path))
        {
            source = $"seeded random (seed {seed}), file not found";
            return Random(count * ImageDimension, seed);
        }

        using var gzip = new GZipStream(File.OpenRead(path), CompressionMode.Decompress);
        Span<byte> header = stackalloc byte[16];
        gzip.ReadExactly(header);

        // idx3 header, big-endian: magic 0x00000803, image count, rows, columns.
        int magic = System.Buffers.Binary.BinaryPrimitives.ReadInt32BigEndian(header);
        int images = System.Buffers.Binary.BinaryPrimitives.ReadInt32BigEndian(header[4..]);
        int rows = System.Buffers.Binary.BinaryPrimitives.ReadInt32BigEndian(header[8..]);
        int columns = System.Buffers.Binary.BinaryPrimitives.ReadInt32BigEndian(header[12..]);
        if (magic != 0x803 || rows * columns != ImageDimension || images < count)
        {
            throw new InvalidDataException($"{path}: not {count} idx3 images of 28×28 (magic {magic:x}, {images} × {rows}×{columns}).");
        }

        var pixels = new byte[count * ImageDimension];
        gzip.ReadExactly(pixels);
        var values = new float[pixels.Length];
        for (int i = 0; i < pixels.Length; i++)
        {
            values[i] = pixels[i] / 255f;
        }

        source = $"Fashion-MNIST {Path.GetFileName(path)}, first {count} images";
        return values;
    }
}

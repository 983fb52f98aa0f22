using VectorKit.IO;

namespace VectorKit.Compare;

/// <summary>Fashion-MNIST's training images (the indexed items) and test images (the queries), pixels scaled to [0, 1].</summary>
internal sealed class FashionData
{
    public const int Dimension = 28 * 28;

    private FashionData(float[] items, int itemCount, float[] queries, int queryCount)
    {
        Items = items;
        ItemCount = itemCount;
        Queries = queries;
        QueryCount = queryCount;
    }

    public float[] Items { get; }

    public int ItemCount { get; }

    public float[] Queries { get; }

    public int QueryCount { get; }

    public static FashionData Load(string directory, int itemCount, int queryCount)
    {
        float[] items = Read(Path.Combine(directory, "train-images-idx3-ubyte.gz"), itemCount);
        float[] queries = Read(Path.Combine(directory, "t10k-images-idx3-ubyte.gz"), queryCount);
        return new FashionData(items, itemCount, queries, queryCount);
    }

    /// <summary>The first <paramref name="count"/> items' vectors.</summary>
    public ReadOnlySpan<float> ItemRows(int count) => Items.AsSpan(0, count * Dimension);

    /// <summary>The first <paramref name="count"/> queries' vectors.</summary>
    public ReadOnlySpan<float> QueryRows(int count) => Queries.AsSpan(0, count * Dimension);

    private static float[] Read(string path, int count)
    {
        if (!File.Exists(path))
        {
            throw new ArgumentException(
                $"{path} not found: install Debian's dataset-fashion-mnist or point VECTORKIT_FASHION_MNIST (or --data) at the idx files");
        }

        VectorSet set = IdxFile.ReadVectors(path);
        if (set.Dimension != Dimension || set.Count < count)
        {
            throw new ArgumentException($"{path}: expected at least {count} images of 28×28, found {set.Count} of dimension {set.Dimension}");
        }

        var values = new float[count * Dimension];
        ReadOnlySpan<float> pixels = set.Data.AsSpan(0, values.Length);
        for (int i = 0; i < values.Length; i++)
        {
            values[i] = pixels[i] / 255f;
        }

        return values;
    }
}

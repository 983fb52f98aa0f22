namespace NativeAotSample;

/// <summary>
/// A small invented catalogue of the Larchpass Outdoor Co-op, generated from a seed: each item's vector is its
/// category's direction plus noise, so items of one category cluster. Only <see cref="Random"/> with a seed and plain
/// float arithmetic are used, so a JIT run and a native run generate the same bits.
/// </summary>
internal sealed class GearCatalogue
{
    private static readonly string[] Categories = ["Shelter", "Sleep", "Kitchen", "Packs", "Water", "Snow", "Climbing", "Trail"];
    private static readonly string[] Words = ["Tarn", "Scree", "Juniper", "Heron", "Moraine", "Larch", "Cirque", "Kestrel"];
    private static readonly string[] Kinds = ["Dome", "Ridge", "Glide", "Spur", "Saddle", "Ledge"];

    private readonly float[] _vectors;

    private GearCatalogue(int dimension, GearItem[] items, float[] vectors)
    {
        Dimension = dimension;
        Items = items;
        _vectors = vectors;
    }

    public int Dimension { get; }

    /// <summary>The items; an item's id is its position here.</summary>
    public IReadOnlyList<GearItem> Items { get; }

    /// <summary>All vectors, row after row, in item order.</summary>
    public ReadOnlySpan<float> Vectors => _vectors;

    public ReadOnlySpan<float> VectorOf(long id) => _vectors.AsSpan(checked((int)id * Dimension), Dimension);

    public static GearCatalogue Generate(int count, int dimension, int seed)
    {
        var random = new Random(seed);
        var centres = new float[Categories.Length * dimension];
        for (int i = 0; i < centres.Length; i++)
        {
            centres[i] = (float)((random.NextDouble() * 2) - 1);
        }

        var items = new GearItem[count];
        var vectors = new float[count * dimension];
        for (int i = 0; i < count; i++)
        {
            int category = random.Next(Categories.Length);
            string name = $"{Words[random.Next(Words.Length)]} {Kinds[random.Next(Kinds.Length)]} {i % 97}";
            items[i] = new GearItem(i, name, Categories[category], InStock: random.Next(3) != 0);
            for (int j = 0; j < dimension; j++)
            {
                vectors[(i * dimension) + j] = centres[(category * dimension) + j] + (float)(0.6 * ((random.NextDouble() * 2) - 1));
            }
        }

        return new GearCatalogue(dimension, items, vectors);
    }

    /// <summary><paramref name="count"/> queries, each a random item's vector with a little noise added.</summary>
    public float[] SampleQueries(int count, int seed)
    {
        var random = new Random(seed);
        var queries = new float[count * Dimension];
        for (int q = 0; q < count; q++)
        {
            ReadOnlySpan<float> item = VectorOf(random.Next(Items.Count));
            for (int j = 0; j < Dimension; j++)
            {
                queries[(q * Dimension) + j] = item[j] + (float)(0.2 * ((random.NextDouble() * 2) - 1));
            }
        }

        return queries;
    }
}

namespace QuickStart;

/// <summary>
/// The invented rental catalogue of the Larchpass Outdoor Co-op, generated from word lists and a seed: same seed, same
/// catalogue, nothing downloaded. Every item gets a unit-length embedding built as
/// <c>category centroid + kind direction + season direction + build direction + noise</c>, so items of one kind
/// cluster, and items sharing a season or build lean towards each other across categories.
/// </summary>
internal sealed class DemoCatalogue
{
    public static readonly string[] Seasons = ["summer", "3-season", "winter"];
    public static readonly string[] Builds = ["ultralight", "standard", "expedition"];

    private static readonly (string Category, string[] Kinds)[] Sections =
    [
        ("Shelter", ["tent", "bivy sack", "tarp shelter"]),
        ("Sleep", ["sleeping bag", "sleeping pad", "camp quilt"]),
        ("Kitchen", ["canister stove", "cook set", "water filter"]),
        ("Packs", ["daypack", "trekking pack", "haul duffel"]),
        ("Water", ["touring kayak", "open canoe", "paddle", "dry bag", "buoyancy vest"]),
        ("Snow", ["touring skis", "snowshoes", "avalanche probe", "splitboard"]),
        ("Climbing", ["climbing rope", "harness", "helmet", "crampons", "ice axe"]),
        ("Trail", ["trekking poles", "headlamp", "gaiters", "camp chair"]),
    ];

    private static readonly string[] FirstWords =
    [
        "Alpine", "Tarn", "Scree", "Juniper", "Basalt", "Fjord", "Heron", "Lichen", "Moraine", "Talus",
        "Cedar", "Granite", "Larch", "Ptarmigan", "Cirque", "Fern", "Plover", "Kestrel", "Bramble", "Glacier",
    ];

    private static readonly string[] SecondWords =
    [
        "Dome", "Drift", "Ridge", "Trail", "Crest", "Hollow", "Summit", "Glide", "Ember", "Spur",
        "Notch", "Saddle", "Cairn", "Runnel", "Ledge", "Col",
    ];

    private static readonly string[] Tags = ["", "", "", "2P", "3P", "UL", "Pro", "Lite", "XL", "Trek"];

    private readonly float[] _vectors;
    private readonly float[][] _centroids;
    private readonly float[][] _kindDirections;
    private readonly float[][] _seasonDirections;
    private readonly float[][] _buildDirections;

    private DemoCatalogue(int dimension, GearItem[] items, float[] vectors, float[][] centroids, float[][] kinds, float[][] seasons, float[][] builds)
    {
        Dimension = dimension;
        Items = items;
        _vectors = vectors;
        _centroids = centroids;
        _kindDirections = kinds;
        _seasonDirections = seasons;
        _buildDirections = builds;
    }

    public int Dimension { get; }

    /// <summary>The items; an item's id is its position here.</summary>
    public IReadOnlyList<GearItem> Items { get; }

    public int CategoryCount => Sections.Length;

    /// <summary>All embeddings, row after row, in item order.</summary>
    public ReadOnlySpan<float> Vectors => _vectors;

    public ReadOnlySpan<float> VectorOf(long id) => _vectors.AsSpan(checked((int)id * Dimension), Dimension);

    /// <summary>Generates <paramref name="count"/> items; the same arguments always give the same catalogue.</summary>
    public static DemoCatalogue Generate(int count, int dimension, int seed)
    {
        var random = new Random(seed);
        float[][] centroids = Directions(random, Sections.Length, dimension, 3.0f);
        float[][] kinds = Directions(random, Sections.Sum(s => s.Kinds.Length), dimension, 2.0f);
        float[][] seasons = Directions(random, Seasons.Length, dimension, 1.0f);
        float[][] builds = Directions(random, Builds.Length, dimension, 0.8f);

        var items = new GearItem[count];
        var vectors = new float[count * dimension];
        for (int i = 0; i < count; i++)
        {
            int section = random.Next(Sections.Length);
            int kind = random.Next(Sections[section].Kinds.Length);
            int season = random.Next(Seasons.Length);
            int build = random.Next(Builds.Length);
            string tag = Tags[random.Next(Tags.Length)];
            string kindName = Sections[section].Kinds[kind];
            string name = $"{FirstWords[random.Next(FirstWords.Length)]} {SecondWords[random.Next(SecondWords.Length)]}{(tag.Length > 0 ? " " + tag : "")} {kindName}";
            bool inStock = random.NextDouble() < 0.7;
            items[i] = new GearItem(i, name, Sections[section].Category, kindName, Seasons[season], Builds[build], inStock);

            Span<float> row = vectors.AsSpan(i * dimension, dimension);
            Compose(row, centroids[section], kinds[KindSlot(section, kind)], seasons[season], builds[build]);
            for (int c = 0; c < dimension; c++)
            {
                row[c] += 0.3f * Gaussian(random);
            }

            Normalize(row);
        }

        return new DemoCatalogue(dimension, items, vectors, centroids, kinds, seasons, builds);
    }

    /// <summary>A query vector for a description such as "winter, ultralight tent": no noise, unit length.</summary>
    public float[] Describe(string category, string kind, string season, string build)
    {
        int section = Array.FindIndex(Sections, s => s.Category == category);
        int kindIndex = Array.IndexOf(Sections[section].Kinds, kind);
        var query = new float[Dimension];
        Compose(query, _centroids[section], _kindDirections[KindSlot(section, kindIndex)], _seasonDirections[Array.IndexOf(Seasons, season)], _buildDirections[Array.IndexOf(Builds, build)]);
        Normalize(query);
        return query;
    }

    /// <summary>
    /// An embedding for an item that is not in the generated catalogue (a new arrival, or an existing item refitted).
    /// Such an item has no rental history yet, so its embedding is its description's direction with only a little
    /// noise (generated items carry six times as much); unit length.
    /// </summary>
    public float[] EmbedNew(GearItem item, int seed)
    {
        var random = new Random(seed);
        int section = Array.FindIndex(Sections, s => s.Category == item.Category);
        int kindIndex = Array.IndexOf(Sections[section].Kinds, item.Kind);
        var row = new float[Dimension];
        Compose(row, _centroids[section], _kindDirections[KindSlot(section, kindIndex)], _seasonDirections[Array.IndexOf(Seasons, item.Season)], _buildDirections[Array.IndexOf(Builds, item.Build)]);
        for (int c = 0; c < Dimension; c++)
        {
            row[c] += 0.05f * Gaussian(random);
        }

        Normalize(row);
        return row;
    }

    /// <summary>Queries that look like "members browsing near an item": an item's embedding plus a little noise.</summary>
    public float[] SampleQueries(int count, int seed)
    {
        var random = new Random(seed);
        var queries = new float[count * Dimension];
        for (int q = 0; q < count; q++)
        {
            Span<float> row = queries.AsSpan(q * Dimension, Dimension);
            VectorOf(random.Next(Items.Count)).CopyTo(row);
            for (int c = 0; c < Dimension; c++)
            {
                row[c] += 0.05f * Gaussian(random);
            }

            Normalize(row);
        }

        return queries;
    }

    private static int KindSlot(int section, int kind)
    {
        int slot = 0;
        for (int s = 0; s < section; s++)
        {
            slot += Sections[s].Kinds.Length;
        }

        return slot + kind;
    }

    private static void Compose(Span<float> row, float[] centroid, float[] kind, float[] season, float[] build)
    {
        for (int c = 0; c < row.Length; c++)
        {
            row[c] = centroid[c] + kind[c] + season[c] + build[c];
        }
    }

    // Random directions of a given length: in 64+ dimensions they are nearly orthogonal to each other.
    private static float[][] Directions(Random random, int count, int dimension, float length)
    {
        var directions = new float[count][];
        for (int i = 0; i < count; i++)
        {
            directions[i] = new float[dimension];
            for (int c = 0; c < dimension; c++)
            {
                directions[i][c] = Gaussian(random);
            }

            Normalize(directions[i]);
            for (int c = 0; c < dimension; c++)
            {
                directions[i][c] *= length;
            }
        }

        return directions;
    }

    private static void Normalize(Span<float> row)
    {
        double sum = 0;
        foreach (float x in row)
        {
            sum += (double)x * x;
        }

        float scale = (float)(1.0 / Math.Sqrt(sum));
        for (int c = 0; c < row.Length; c++)
        {
            row[c] *= scale;
        }
    }

    // Box–Muller; 1 − u keeps the logarithm's argument in (0, 1].
    private static float Gaussian(Random random)
        => (float)(Math.Sqrt(-2.0 * Math.Log(1.0 - random.NextDouble())) * Math.Cos(2.0 * Math.PI * random.NextDouble()));
}

namespace RerankingSample;

/// <summary>One rentable item of the Larchpass Outdoor Co-op (invented).</summary>
/// <param name="Id">Its id in the index (its position in the catalogue).</param>
/// <param name="Kind">The kind of gear, e.g. "touring kayak".</param>
/// <param name="Depot">The depot that holds it, 0–11, along the valley road.</param>
/// <param name="UnitsFree">Units free for the coming weekend; 0 means fully booked.</param>
/// <param name="DailyFee">The rental fee per day, in co-op credits.</param>
internal sealed record RentalItem(long Id, string Kind, int Depot, int UnitsFree, float DailyFee);

/// <summary>
/// The invented rental catalogue: items with a unit-length taste embedding (kind centre + noise) and attributes that
/// the embedding knows nothing about — depot, availability, fee. Generated from a seed; nothing downloaded.
/// </summary>
internal sealed class RentalCatalogue
{
    public const int Depots = 12;

    private static readonly string[] Kinds =
    [
        "tent", "bivy sack", "tarp shelter", "sleeping bag", "sleeping pad", "camp quilt", "canister stove",
        "cook set", "water filter", "daypack", "trekking pack", "haul duffel", "touring kayak", "open canoe",
        "paddle", "dry bag", "buoyancy vest", "touring skis", "snowshoes", "avalanche probe", "splitboard",
        "climbing rope", "harness", "helmet", "crampons", "ice axe", "trekking poles", "headlamp",
    ];

    private readonly float[] _vectors;
    private readonly float[][] _kindCentres;

    private RentalCatalogue(int dimension, RentalItem[] items, float[] vectors, float[][] kindCentres)
    {
        Dimension = dimension;
        Items = items;
        _vectors = vectors;
        _kindCentres = kindCentres;
    }

    public int Dimension { get; }

    public IReadOnlyList<RentalItem> Items { get; }

    public float[] Vectors => _vectors;

    /// <summary>Depots sit 6 km apart along one valley road.</summary>
    public static float Kilometres(int depotA, int depotB) => 6f * Math.Abs(depotA - depotB);

    public ReadOnlySpan<float> VectorOf(long id) => _vectors.AsSpan((int)id * Dimension, Dimension);

    public static RentalCatalogue Generate(int count, int dimension, int seed)
    {
        var random = new Random(seed);
        float[][] centres = Kinds.Select(_ => Gaussian(random, dimension, 1f)).ToArray();
        var items = new RentalItem[count];
        var vectors = new float[count * dimension];
        for (int i = 0; i < count; i++)
        {
            int kind = random.Next(Kinds.Length);
            float[] noise = Gaussian(random, dimension, 0.9f);
            Span<float> row = vectors.AsSpan(i * dimension, dimension);
            for (int j = 0; j < dimension; j++)
            {
                row[j] = centres[kind][j] + noise[j];
            }

            Normalise(row);
            int unitsFree = random.NextDouble() < 0.3 ? 0 : random.Next(1, 6);
            items[i] = new RentalItem(i, Kinds[kind], random.Next(Depots), unitsFree, (float)Math.Round(5 + (40 * random.NextDouble()), 1));
        }

        return new RentalCatalogue(dimension, items, vectors, centres);
    }

    /// <summary>Members' requests: a taste vector near one kind (what they browsed), their home depot, a fee budget.</summary>
    public RentalRequest[] Requests(int count, int seed)
    {
        var random = new Random(seed);
        var requests = new RentalRequest[count];
        for (int q = 0; q < count; q++)
        {
            float[] centre = _kindCentres[random.Next(_kindCentres.Length)];
            float[] noise = Gaussian(random, Dimension, 0.9f);
            float[] taste = new float[Dimension];
            for (int j = 0; j < Dimension; j++)
            {
                taste[j] = centre[j] + noise[j];
            }

            Normalise(taste);
            requests[q] = new RentalRequest(q, taste, random.Next(Depots), (float)Math.Round(10 + (30 * random.NextDouble()), 1));
        }

        return requests;
    }

    private static float[] Gaussian(Random random, int dimension, float scale)
    {
        var v = new float[dimension];
        for (int j = 0; j < dimension; j++)
        {
            v[j] = scale * (float)(Math.Sqrt(-2 * Math.Log(1 - random.NextDouble())) * Math.Cos(2 * Math.PI * random.NextDouble()));
        }

        return v;
    }

    private static void Normalise(Span<float> v)
    {
        float norm = 0;
        foreach (float x in v)
        {
            norm += x * x;
        }

        norm = MathF.Sqrt(norm);
        for (int j = 0; j < v.Length; j++)
        {
            v[j] /= norm;
        }
    }
}

/// <summary>A member's request at the rental desk.</summary>
/// <param name="Number">A running number, for display.</param>
/// <param name="Taste">A unit vector summarising what the member browsed and rented before.</param>
/// <param name="HomeDepot">The depot the member collects from.</param>
/// <param name="FeeBudget">The daily fee the member is comfortable with.</param>
internal sealed record RentalRequest(int Number, float[] Taste, int HomeDepot, float FeeBudget);

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>
/// Seeded data for the contract suite: Gaussian points around eight fixed centres per dimension, so the training
/// sample, the items and the queries of every test come from one distribution (an 8-bit code's ranges and an inverted
/// file's centroids learnt on the sample then fit the items).
/// </summary>
internal static class ContractData
{
    private const int Clusters = 8;
    private const float Spread = 0.3f;
    private const int CentreSeed = 9001;
    private const int TrainingSeed = 77;

    /// <summary>Rows every trainable variant learns from: 1,024 (product codes need 256).</summary>
    public const int TrainingRows = 1024;

    /// <summary><paramref name="count"/> rows of <paramref name="dimension"/>; the same arguments give the same floats.</summary>
    public static float[] Rows(int count, int dimension, int seed)
    {
        var centres = new Random(CentreSeed + dimension);
        var centre = new float[Clusters * dimension];
        for (int i = 0; i < centre.Length; i++)
        {
            centre[i] = (float)((centres.NextDouble() * 2) - 1);
        }

        var random = new Random(seed);
        var data = new float[count * dimension];
        for (int r = 0; r < count; r++)
        {
            int c = random.Next(Clusters);
            for (int j = 0; j < dimension; j++)
            {
                data[(r * dimension) + j] = centre[(c * dimension) + j] + (Spread * Gaussian(random));
            }
        }

        return data;
    }

    /// <summary>The fixed training sample of a dimension.</summary>
    public static float[] TrainingSample(int dimension) => Rows(TrainingRows, dimension, TrainingSeed);

    /// <summary>
    /// <paramref name="count"/> distinct ids, negative and positive, not in row order and not dense, so an index that
    /// confuses ids with slots or rows fails.
    /// </summary>
    public static long[] Ids(int count, long offset = 0)
    {
        var ids = new long[count];
        for (int i = 0; i < count; i++)
        {
            // 7919 is prime and coprime with 10007, so i -> (7919 i) mod 10007 is one-to-one for i < 10007.
            ids[i] = offset + (((7919L * i) % 10_007) * 3) - 15_000;
        }

        return ids;
    }

    // Box–Muller.
    private static float Gaussian(Random random)
    {
        double u = 1.0 - random.NextDouble();
        double v = random.NextDouble();
        return (float)(Math.Sqrt(-2 * Math.Log(u)) * Math.Cos(2 * Math.PI * v));
    }
}

namespace VectorKit.Tests.TestData;

/// <summary>
/// Seeded synthetic vectors: Gaussian clusters around random centres, or plain Gaussian noise, optionally normalised.
/// The same arguments always give the same floats.
/// </summary>
public static class ClusteredData
{
    /// <summary><paramref name="count"/> rows of <paramref name="dimension"/>: centres uniform in [−1, 1]ᵈ, points at Gaussian spread <paramref name="spread"/> around a random centre.</summary>
    public static float[] Generate(int count, int dimension, int clusters, float spread, int seed, bool normalise = false)
    {
        var random = new Random(seed);
        var centres = new float[clusters * dimension];
        for (int i = 0; i < centres.Length; i++)
        {
            centres[i] = (float)((random.NextDouble() * 2) - 1);
        }

        var data = new float[count * dimension];
        for (int r = 0; r < count; r++)
        {
            int c = random.Next(clusters);
            for (int j = 0; j < dimension; j++)
            {
                data[(r * dimension) + j] = centres[(c * dimension) + j] + (spread * Gaussian(random));
            }

            if (normalise)
            {
                Normalise(data.AsSpan(r * dimension, dimension));
            }
        }

        return data;
    }

    /// <summary>Uniformly random directions: Gaussian rows scaled to unit length.</summary>
    public static float[] RandomUnit(int count, int dimension, int seed)
    {
        var random = new Random(seed);
        var data = new float[count * dimension];
        for (int i = 0; i < data.Length; i++)
        {
            data[i] = Gaussian(random);
        }

        for (int r = 0; r < count; r++)
        {
            Normalise(data.AsSpan(r * dimension, dimension));
        }

        return data;
    }

    private static void Normalise(Span<float> row)
    {
        double sum = 0;
        foreach (float x in row)
        {
            sum += (double)x * x;
        }

        float scale = (float)(1 / Math.Sqrt(sum));
        for (int i = 0; i < row.Length; i++)
        {
            row[i] *= scale;
        }
    }

    // Box–Muller.
    private static float Gaussian(Random random)
    {
        double u = 1.0 - random.NextDouble();
        double v = random.NextDouble();
        return (float)(Math.Sqrt(-2 * Math.Log(u)) * Math.Cos(2 * Math.PI * v));
    }
}

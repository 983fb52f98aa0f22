using VectorKit.Distance;

namespace VectorKit.Tests.Evaluation;

/// <summary>An independent oracle: a plain nested loop in double precision, sorted by (distance, id).</summary>
internal static class BruteForceReference
{
    public static long[][] Neighbours(float[] data, long[] ids, float[] queries, int dimension, int k, DistanceMetric metric)
    {
        int n = data.Length / dimension;
        int queryCount = queries.Length / dimension;
        var rows = new long[queryCount][];
        for (int q = 0; q < queryCount; q++)
        {
            var scored = new (double Distance, long Id)[n];
            for (int i = 0; i < n; i++)
            {
                double dot = 0, qq = 0, xx = 0, diff = 0;
                for (int c = 0; c < dimension; c++)
                {
                    double a = queries[(q * dimension) + c];
                    double b = data[(i * dimension) + c];
                    dot += a * b;
                    qq += a * a;
                    xx += b * b;
                    diff += (a - b) * (a - b);
                }

                double distance = metric switch
                {
                    DistanceMetric.SquaredEuclidean => diff,
                    DistanceMetric.InnerProduct => -dot,
                    _ => 1.0 - (dot / (Math.Sqrt(qq) * Math.Sqrt(xx))),
                };
                scored[i] = (distance, ids[i]);
            }

            Array.Sort(scored, (x, y) => x.Distance != y.Distance ? x.Distance.CompareTo(y.Distance) : x.Id.CompareTo(y.Id));
            rows[q] = scored.Take(Math.Min(k, n)).Select(s => s.Id).ToArray();
        }

        return rows;
    }

    /// <summary>Integer-valued components in [-range, range]: sums of their products are exact in float, so ties are exact too.</summary>
    public static float[] IntegerVectors(Random random, int count, int dimension, int range)
    {
        var values = new float[count * dimension];
        for (int i = 0; i < values.Length; i++)
        {
            values[i] = random.Next(-range, range + 1);
        }

        return values;
    }

    public static float[] GaussianVectors(Random random, int count, int dimension)
    {
        var values = new float[count * dimension];
        for (int i = 0; i < values.Length; i++)
        {
            // Box–Muller; 1 − u keeps the logarithm's argument in (0, 1].
            double u = 1.0 - random.NextDouble();
            double v = random.NextDouble();
            values[i] = (float)(Math.Sqrt(-2.0 * Math.Log(u)) * Math.Cos(2.0 * Math.PI * v));
        }

        return values;
    }
}

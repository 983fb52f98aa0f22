using System.Numerics;

namespace VectorKit.TextEmbeddings;

/// <summary>Exact top-k by cosine in double precision: the data set's ground truth.</summary>
internal static class DoubleNeighbors
{
    /// <summary>
    /// For each query, the k item rows of highest cosine (computed in double from the stored float32 vectors, with
    /// each vector's own double norm), best first, ties by ascending row; and their cosine distances 1 − cos.
    /// </summary>
    public static (int[] Rows, float[] Distances) Compute(float[] items, float[] queries, int dimension, int k)
    {
        int n = items.Length / dimension, q = queries.Length / dimension;
        k = Math.Min(k, n);
        double[] unitItems = ToUnitDouble(items, dimension);
        double[] unitQueries = ToUnitDouble(queries, dimension);
        var rows = new int[q * k];
        var distances = new float[q * k];
        Parallel.For(0, q, new ParallelOptions { MaxDegreeOfParallelism = Environment.ProcessorCount }, () => new double[n], (query, _, scores) =>
        {
            ReadOnlySpan<double> x = unitQueries.AsSpan(query * dimension, dimension);
            for (int i = 0; i < n; i++)
            {
                scores[i] = Dot(x, unitItems.AsSpan(i * dimension, dimension));
            }

            int[] best = TopRows(scores, k);
            for (int j = 0; j < k; j++)
            {
                rows[(query * k) + j] = best[j];
                distances[(query * k) + j] = (float)(1.0 - scores[best[j]]);
            }

            return scores;
        }, _ => { });
        return (rows, distances);
    }

    /// <summary>Rows of the k highest scores, best first, ties by ascending row.</summary>
    public static int[] TopRows(double[] scores, int k)
    {
        // A bounded selection: keep the k best seen so far sorted; most rows fail the first comparison.
        var best = new int[k];
        int filled = 0;
        for (int i = 0; i < scores.Length; i++)
        {
            double s = scores[i];
            if (filled == k && !(s > scores[best[k - 1]]))
            {
                continue; // ties keep the earlier (smaller) row
            }

            int at = filled < k ? filled++ : k - 1;
            while (at > 0 && s > scores[best[at - 1]])
            {
                best[at] = best[at - 1];
                at--;
            }

            best[at] = i;
        }

        return best;
    }

    /// <summary>Plain double dot product; Vector&lt;double&gt; partial sums, then the tail.</summary>
    public static double Dot(ReadOnlySpan<double> a, ReadOnlySpan<double> b)
    {
        var sum = Vector<double>.Zero;
        int i = 0;
        for (; i <= a.Length - Vector<double>.Count; i += Vector<double>.Count)
        {
            sum += new Vector<double>(a[i..]) * new Vector<double>(b[i..]);
        }

        double total = Vector.Sum(sum);
        for (; i < a.Length; i++)
        {
            total += a[i] * b[i];
        }

        return total;
    }

    private static double[] ToUnitDouble(float[] data, int dimension)
    {
        var result = new double[data.Length];
        for (int row = 0; row < data.Length / dimension; row++)
        {
            double norm = 0;
            for (int j = 0; j < dimension; j++)
            {
                double v = data[(row * dimension) + j];
                norm += v * v;
            }

            norm = Math.Sqrt(norm);
            for (int j = 0; j < dimension; j++)
            {
                result[(row * dimension) + j] = data[(row * dimension) + j] / norm;
            }
        }

        return result;
    }
}

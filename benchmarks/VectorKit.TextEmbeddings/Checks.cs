using MathNet.Numerics.LinearAlgebra.Double;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.TextEmbeddings;

/// <summary>Checks of the made data against independent computations; each prints its result and returns pass/fail.</summary>
internal static class Checks
{
    /// <summary>Every vector has length 1 within float rounding of a 384-term sum.</summary>
    public static bool UnitLength(string label, float[] vectors, int dimension)
    {
        double worst = 0;
        for (int row = 0; row < vectors.Length / dimension; row++)
        {
            double sum = 0;
            foreach (float v in vectors.AsSpan(row * dimension, dimension))
            {
                sum += (double)v * v;
            }

            worst = Math.Max(worst, Math.Abs(Math.Sqrt(sum) - 1));
        }

        bool ok = worst < 1e-5;
        Console.WriteLine($"  check unit length, {label}: largest |norm - 1| = {worst:E2} ({(ok ? "ok" : "FAILED, limit 1e-5")})");
        return ok;
    }

    /// <summary>
    /// The library's exact index (float32, cosine) against the double ground truth on the first queries: each
    /// differing position must be a pair of rows whose double cosines differ by less than float rounding.
    /// </summary>
    public static bool ExactIndexAgrees(float[] items, float[] queries, int dimension, int[] truthRows, int k, int sample)
    {
        int n = items.Length / dimension;
        sample = Math.Min(sample, queries.Length / dimension);
        using var index = new ExactIndex(dimension, DistanceMetric.Cosine, new ExactIndexOptions { InitialCapacity = n });
        index.AddRange(Enumerable.Range(0, n).Select(i => (long)i).ToArray(), items);
        BatchSearchResults found = index.SearchBatch(queries.AsSpan(0, sample * dimension), k);
        int identical = 0, explained = 0, unexplained = 0;
        long hits = 0;
        for (int q = 0; q < sample; q++)
        {
            ReadOnlySpan<SearchHit> row = found[q];
            var truth = truthRows.AsSpan(q * k, k);
            bool same = true;
            var truthSet = new HashSet<int>(truth.ToArray());
            for (int j = 0; j < k; j++)
            {
                hits += truthSet.Contains((int)row[j].Id) ? 1 : 0;
                if (row[j].Id == truth[j])
                {
                    continue;
                }

                same = false;
                double a = CosineDouble(queries, q, items, (int)row[j].Id, dimension);
                double b = CosineDouble(queries, q, items, truth[j], dimension);
                if (Math.Abs(a - b) < 1e-6)
                {
                    explained++;
                }
                else
                {
                    unexplained++;
                }
            }

            identical += same ? 1 : 0;
        }

        bool ok = unexplained == 0;
        Console.WriteLine($"  check exact index (float32) vs double ground truth, {sample} queries, top {k}: {identical} lists identical, "
            + $"recall@{k} {hits / (double)(sample * k):F6}, {explained} positions swapped within 1e-6 in cosine, {unexplained} otherwise ({(ok ? "ok" : "FAILED")})");
        return ok;
    }

    /// <summary>The ground truth against MathNet.Numerics dot products and norms on a sample of queries.</summary>
    public static bool MathNetAgrees(float[] items, float[] queries, int dimension, int[] truthRows, int k, int sample)
    {
        int n = items.Length / dimension;
        sample = Math.Min(sample, queries.Length / dimension);
        var itemVectors = new DenseVector[n];
        for (int i = 0; i < n; i++)
        {
            itemVectors[i] = DenseVector.OfEnumerable(items.AsSpan(i * dimension, dimension).ToArray().Select(v => (double)v));
        }

        int identical = 0;
        for (int q = 0; q < sample; q++)
        {
            var query = DenseVector.OfEnumerable(queries.AsSpan(q * dimension, dimension).ToArray().Select(v => (double)v));
            double queryNorm = query.L2Norm();
            var scores = new double[n];
            for (int i = 0; i < n; i++)
            {
                scores[i] = query.DotProduct(itemVectors[i]) / (queryNorm * itemVectors[i].L2Norm());
            }

            int[] order = Enumerable.Range(0, n).OrderByDescending(i => scores[i]).ThenBy(i => i).Take(k).ToArray();
            identical += order.AsSpan().SequenceEqual(truthRows.AsSpan(q * k, k)) ? 1 : 0;
        }

        bool ok = identical == sample;
        Console.WriteLine($"  check ground truth vs MathNet.Numerics, {sample} queries, top {k}: {identical} of {sample} lists identical ({(ok ? "ok" : "FAILED")})");
        return ok;
    }

    private static double CosineDouble(float[] a, int rowA, float[] b, int rowB, int dimension)
    {
        double dot = 0, na = 0, nb = 0;
        for (int j = 0; j < dimension; j++)
        {
            double x = a[(rowA * dimension) + j], y = b[(rowB * dimension) + j];
            dot += x * y;
            na += x * x;
            nb += y * y;
        }

        return dot / Math.Sqrt(na * nb);
    }
}

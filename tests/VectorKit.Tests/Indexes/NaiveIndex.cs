using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes;

/// <summary>
/// The independent oracle for index tests: a dictionary of vectors and a double-precision full sort.
/// Shares no code with the library's kernels, heap or storage.
/// </summary>
internal sealed class NaiveIndex(int dimension, DistanceMetric metric)
{
    private readonly Dictionary<long, double[]> _vectors = new();

    public int Count => _vectors.Count;

    public void Add(long id, ReadOnlySpan<float> vector)
    {
        double[] v = new double[dimension];
        for (int i = 0; i < dimension; i++)
        {
            v[i] = vector[i];
        }

        if (metric == DistanceMetric.Cosine)
        {
            double norm = Math.Sqrt(v.Sum(x => x * x));
            for (int i = 0; i < dimension; i++)
            {
                v[i] /= norm;
            }
        }

        _vectors.Add(id, v);
    }

    public bool Remove(long id) => _vectors.Remove(id);

    public bool Contains(long id) => _vectors.ContainsKey(id);

    public static double Distance(DistanceMetric metric, double[] q, double[] x)
    {
        double sum = 0;
        for (int i = 0; i < q.Length; i++)
        {
            sum += metric == DistanceMetric.SquaredEuclidean ? (q[i] - x[i]) * (q[i] - x[i]) : q[i] * x[i];
        }

        return metric switch
        {
            DistanceMetric.SquaredEuclidean => sum,
            DistanceMetric.InnerProduct => -sum,
            _ => 1 - sum,
        };
    }

    /// <summary>All (id, distance) pairs passing the filter, sorted by distance then id.</summary>
    public List<(long Id, double Distance)> Ranked(ReadOnlySpan<float> query, Func<long, bool>? filter = null)
    {
        double[] q = new double[dimension];
        for (int i = 0; i < dimension; i++)
        {
            q[i] = query[i];
        }

        if (metric == DistanceMetric.Cosine)
        {
            double norm = Math.Sqrt(q.Sum(x => x * x));
            for (int i = 0; i < dimension; i++)
            {
                q[i] /= norm;
            }
        }

        return _vectors
            .Where(p => filter is null || filter(p.Key))
            .Select(p => (p.Key, Distance(metric, q, p.Value)))
            .OrderBy(p => p.Item2).ThenBy(p => p.Key)
            .ToList();
    }
}

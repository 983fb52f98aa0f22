using System.Numerics;
using System.Runtime.InteropServices;
using VectorKit.Distance;

namespace VectorKit.Internal;

/// <summary>Boundary checks and the cosine normalisation shared by every index.</summary>
internal static class VectorChecks
{
    /// <summary>Checks one vector for an add: dimension, finite components, and not zero under cosine.</summary>
    public static void CheckForAdd(ReadOnlySpan<float> vector, int dimension, DistanceMetric metric)
    {
        CheckVector(vector, dimension, nameof(vector));
        if (metric == DistanceMetric.Cosine)
        {
            CheckNotZero(vector, nameof(vector));
        }
    }

    /// <summary>
    /// Checks a whole batch for an add before anything is written: lengths agree, every component is finite, no zero
    /// vector under cosine, no id repeated within the batch. (Ids already in the index are checked under the lock.)
    /// </summary>
    public static void CheckBatchForAdd(ReadOnlySpan<long> ids, ReadOnlySpan<float> vectors, int dimension, DistanceMetric metric)
    {
        int n = ids.Length;
        if ((long)n * dimension != vectors.Length)
        {
            ThrowHelper.ThrowArgument(nameof(vectors), $"vectors has {vectors.Length} components; {n} ids × dimension {dimension} need {(long)n * dimension}.");
        }

        CheckFinite(vectors, nameof(vectors), 0, dimension);
        if (metric == DistanceMetric.Cosine)
        {
            for (int r = 0; r < n; r++)
            {
                CheckNotZero(vectors.Slice(r * dimension, dimension), $"{nameof(vectors)} row {r}");
            }
        }

        CheckUniqueIds(ids);
    }

    // Up to this many ids, the pairwise check's vectorised scans cost less than building a set.
    private const int PairwiseIdLimit = 32;

    /// <summary>Throws on the first id that appears twice in <paramref name="ids"/>.</summary>
    public static void CheckUniqueIds(ReadOnlySpan<long> ids)
    {
        // A few ids (a single write's) are compared pairwise: no set is allocated for them.
        if (ids.Length <= PairwiseIdLimit)
        {
            for (int i = 1; i < ids.Length; i++)
            {
                if (ids[..i].Contains(ids[i]))
                {
                    ThrowHelper.ThrowArgument(nameof(ids), $"Id {ids[i]} appears more than once in ids; ids must be unique.");
                }
            }

            return;
        }

        var seen = new HashSet<long>(ids.Length, KeyedIdComparer.Instance);
        foreach (long id in ids)
        {
            if (!seen.Add(id))
            {
                ThrowHelper.ThrowArgument(nameof(ids), $"Id {id} appears more than once in ids; ids must be unique.");
            }
        }
    }

    /// <summary>Throws unless <paramref name="vector"/> has <paramref name="dimension"/> finite components.</summary>
    public static void CheckVector(ReadOnlySpan<float> vector, int dimension, string paramName)
    {
        if (vector.Length != dimension)
        {
            ThrowHelper.ThrowDimensionMismatch(paramName, dimension, vector.Length);
        }

        CheckFinite(vector, paramName, 0, dimension);
    }

    /// <summary>
    /// The query preparation every single search starts with: <paramref name="query"/> must have
    /// <paramref name="dimension"/> finite components; under cosine it is scaled to unit length into
    /// <paramref name="unitScratch"/> (at least <paramref name="dimension"/> long; a zero query is rejected).
    /// </summary>
    /// <returns>The query as the index searches it.</returns>
    public static ReadOnlySpan<float> PrepareQuery(ReadOnlySpan<float> query, int dimension, DistanceMetric metric, Span<float> unitScratch)
    {
        CheckVector(query, dimension, nameof(query));
        if (metric != DistanceMetric.Cosine)
        {
            return query;
        }

        Span<float> unit = unitScratch[..dimension];
        Normalize(query, unit, nameof(query));
        return unit;
    }

    /// <summary>
    /// The checks every batch search starts with: k positive, the queries a whole number of rows, every component
    /// finite. Returns the number of queries, and under cosine the queries normalised to unit length (a new array;
    /// a zero row is rejected), else <see langword="null"/>.
    /// </summary>
    public static float[]? CheckBatchQueries(ReadOnlySpan<float> queries, int k, int dimension, DistanceMetric metric, out int queryCount)
    {
        if (k <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(k), k, "must be positive");
        }

        if (queries.Length % dimension != 0)
        {
            ThrowHelper.ThrowArgument(nameof(queries), $"queries has {queries.Length} components, not a multiple of the index dimension {dimension}.");
        }

        queryCount = queries.Length / dimension;
        CheckFinite(queries, nameof(queries), 0, dimension);
        if (metric != DistanceMetric.Cosine)
        {
            return null;
        }

        var unit = new float[queries.Length];
        for (int i = 0; i < queryCount; i++)
        {
            Normalize(queries.Slice(i * dimension, dimension), unit.AsSpan(i * dimension, dimension), $"{nameof(queries)} row {i}");
        }

        return unit;
    }

    /// <summary>Throws on the first NaN or infinity; <paramref name="rowLength"/> turns a flat offset into row and column in the message.</summary>
    public static void CheckFinite(ReadOnlySpan<float> values, string paramName, int firstRow, int rowLength)
    {
        int bad = IndexOfNonFinite(values);
        if (bad >= 0)
        {
            if (rowLength > 0 && values.Length > rowLength)
            {
                ThrowHelper.ThrowArgument(paramName, $"{paramName} row {firstRow + (bad / rowLength)} has a non-finite component: [{bad % rowLength}] = {values[bad]}. Every component must be a finite number.");
            }

            ThrowHelper.ThrowNotFinite(paramName, bad, values[bad]);
        }
    }

    /// <summary>The index of the first NaN or infinite value, or -1.</summary>
    public static int IndexOfNonFinite(ReadOnlySpan<float> values)
    {
        // x − x is 0 for every finite x and NaN for NaN and ±∞, so one compare per lane finds both.
        int i = 0;
        if (Vector.IsHardwareAccelerated)
        {
            ReadOnlySpan<Vector<float>> lanes = MemoryMarshal.Cast<float, Vector<float>>(values);
            for (int v = 0; v < lanes.Length; v++)
            {
                Vector<float> x = lanes[v];
                if (!Vector.EqualsAll(x - x, Vector<float>.Zero))
                {
                    break;
                }

                i += Vector<float>.Count;
            }
        }

        for (; i < values.Length; i++)
        {
            if (!float.IsFinite(values[i]))
            {
                return i;
            }
        }

        return -1;
    }

    /// <summary>
    /// Training rows as a cosine index stores vectors: a copy of <paramref name="sample"/> with every row scaled to unit
    /// length (the quantizer ranges or centroids are learnt on what will be encoded). Throws for a zero row, naming it.
    /// </summary>
    public static float[] NormalizedRows(ReadOnlySpan<float> sample, int dimension, string paramName, CancellationToken cancellationToken = default)
    {
        var normalised = new float[sample.Length];
        int n = sample.Length / dimension;
        for (int r = 0; r < n; r++)
        {
            if ((r & 4095) == 4095)
            {
                cancellationToken.ThrowIfCancellationRequested();
            }

            Normalize(sample.Slice(r * dimension, dimension), normalised.AsSpan(r * dimension, dimension), $"{paramName} row {r}");
        }

        return normalised;
    }

    /// <summary>Writes <paramref name="vector"/> scaled to unit length; throws for a zero vector.</summary>
    /// <remarks>The norm is summed in double so vectors with huge finite components do not overflow to infinity.</remarks>
    public static void Normalize(ReadOnlySpan<float> vector, Span<float> destination, string paramName)
    {
        double sum = 0;
        foreach (float x in vector)
        {
            sum += (double)x * x;
        }

        if (sum == 0)
        {
            ThrowHelper.ThrowZeroVectorUnderCosine(paramName);
        }

        double scale = 1.0 / Math.Sqrt(sum);
        for (int i = 0; i < vector.Length; i++)
        {
            destination[i] = (float)(vector[i] * scale);
        }
    }

    /// <summary>Throws for a zero vector (used to validate a batch before anything is written).</summary>
    public static void CheckNotZero(ReadOnlySpan<float> vector, string paramName)
    {
        if (vector.IndexOfAnyExcept(0f) < 0 && vector.IndexOfAnyExcept(-0f) < 0)
        {
            ThrowHelper.ThrowZeroVectorUnderCosine(paramName);
        }
    }

    /// <summary>The destination of a stored vector must hold <paramref name="dimension"/> components.</summary>
    public static void CheckVectorDestination(Span<float> destination, int dimension)
    {
        if (destination.Length < dimension)
        {
            ThrowHelper.ThrowArgument(nameof(destination), $"destination has {destination.Length} elements; the index dimension is {dimension}.");
        }
    }

    /// <summary>The destination of a search is k long, and k must be positive.</summary>
    public static void CheckResultDestination<T>(Span<T> destination)
    {
        if (destination.IsEmpty)
        {
            ThrowHelper.ThrowArgument(nameof(destination), "destination is empty: its length is k, the number of results wanted, which must be positive.");
        }
    }

    /// <summary>Throws when <paramref name="metric"/> is not a defined value.</summary>
    public static void CheckMetric(DistanceMetric metric)
    {
        if (metric is not (DistanceMetric.SquaredEuclidean or DistanceMetric.InnerProduct or DistanceMetric.Cosine))
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(metric), metric, "must be SquaredEuclidean, InnerProduct or Cosine");
        }
    }
}

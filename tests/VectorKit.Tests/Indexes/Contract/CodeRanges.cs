using VectorKit.Distance;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>
/// The reference for vectors read back from 8-bit codes without full vectors: each component of what was encoded is
/// clamped to the range the training rows spanned and rounded to one of 256 levels, so the decoded value lies within
/// half a level of the clamped one. Recomputed here from the training sample, in double, independently of the quantizer.
/// </summary>
internal sealed class CodeRanges
{
    private readonly double[] _minimums;
    private readonly double[] _maximums;

    private CodeRanges(double[] minimums, double[] maximums)
    {
        _minimums = minimums;
        _maximums = maximums;
    }

    private static readonly System.Collections.Concurrent.ConcurrentDictionary<(int, DistanceMetric), CodeRanges> Training = new();

    /// <summary>The ranges of the training sample as stored (whole-vector codes).</summary>
    public static CodeRanges ForTraining(int dimension, DistanceMetric metric)
        => Training.GetOrAdd((dimension, metric), key => Of(StoredTrainingRows(key.Item1, key.Item2)));

    /// <summary>The index of the centroid nearest to a row by squared Euclidean distance, in double.</summary>
    public static int Nearest(double[] row, float[] centroids)
    {
        int d = row.Length, best = 0;
        double bestDistance = double.PositiveInfinity;
        for (int c = 0; c < centroids.Length / d; c++)
        {
            double sum = 0;
            for (int j = 0; j < d; j++)
            {
                double difference = row[j] - centroids[(c * d) + j];
                sum += difference * difference;
            }

            if (sum < bestDistance)
            {
                (best, bestDistance) = (c, sum);
            }
        }

        return best;
    }

    /// <summary>The ranges of the training rows' residuals from their nearest centroids (residual codes).</summary>
    public static CodeRanges OfResiduals(int dimension, DistanceMetric metric, float[] centroids)
    {
        List<double[]> residuals = StoredTrainingRows(dimension, metric)
            .Select(row =>
            {
                int c = Nearest(row, centroids);
                return row.Select((v, j) => v - centroids[(c * dimension) + j]).ToArray();
            })
            .ToList();
        return Of(residuals);
    }

    /// <summary>The per-component ranges of rows (row after row).</summary>
    public static CodeRanges Of(IReadOnlyList<double[]> rows)
    {
        int d = rows[0].Length;
        double[] minimums = Enumerable.Range(0, d).Select(j => rows.Min(r => r[j])).ToArray();
        double[] maximums = Enumerable.Range(0, d).Select(j => rows.Max(r => r[j])).ToArray();
        return new CodeRanges(minimums, maximums);
    }

    /// <summary>The training sample as an index stores it: unit rows under cosine.</summary>
    public static List<double[]> StoredTrainingRows(int dimension, DistanceMetric metric)
    {
        float[] sample = ContractData.TrainingSample(dimension);
        return Enumerable.Range(0, sample.Length / dimension)
            .Select(r => IndexContractTests.PreparedRow(sample.AsSpan(r * dimension, dimension), metric))
            .ToList();
    }

    /// <summary>Asserts that <paramref name="decoded"/> is <paramref name="encoded"/> clamped to the ranges, within half a level.</summary>
    public void AssertDecoded(double[] encoded, ReadOnlySpan<float> decoded, double[]? offset = null)
    {
        for (int j = 0; j < encoded.Length; j++)
        {
            double shift = offset?[j] ?? 0;
            double expected = Math.Clamp(encoded[j] - shift, _minimums[j], _maximums[j]) + shift;
            double halfLevel = (_maximums[j] - _minimums[j]) / 255 / 2;
            double tolerance = (halfLevel * 1.01) + (1e-5 * (1 + Math.Abs(expected)));
            Assert.True(
                Math.Abs(decoded[j] - expected) <= tolerance,
                $"component {j}: decoded {decoded[j]}, encoded {encoded[j]} clamped to [{_minimums[j] + shift}, {_maximums[j] + shift}] is {expected} (tolerance {tolerance})");
        }
    }
}

using VectorKit.Distance;
using VectorKit.Internal;
using VectorKit.Quantization;

namespace VectorKit.Indexes;

/// <summary>The training step of every index kind that holds 8-bit codes of whole vectors (exact, graph).</summary>
internal static class ScalarCodeTraining
{
    /// <summary>
    /// Checks the sample (at least one row, whole rows, finite components), scales its rows to unit length under cosine
    /// (the ranges are learnt on what will be encoded; a zero row is rejected and named), and learns the ranges; with
    /// <paramref name="codes"/> false it only checks, since float32 storage learns nothing.
    /// </summary>
    /// <returns>The trained quantizer, or <see langword="null"/> when <paramref name="codes"/> is false.</returns>
    public static ScalarQuantizer? Learn(ReadOnlySpan<float> sample, int dimension, DistanceMetric metric, bool codes, CancellationToken cancellationToken)
    {
        if (sample.IsEmpty || sample.Length % dimension != 0)
        {
            ThrowHelper.ThrowArgument(nameof(sample), $"sample has {sample.Length} components; training needs at least 1 row and a multiple of the index dimension {dimension}.");
        }

        VectorChecks.CheckFinite(sample, nameof(sample), 0, dimension);
        cancellationToken.ThrowIfCancellationRequested();
        float[]? normalized = metric == DistanceMetric.Cosine ? VectorChecks.NormalizedRows(sample, dimension, nameof(sample), cancellationToken) : null;
        return codes ? ScalarQuantizer.Train(normalized ?? sample, dimension, null, cancellationToken) : null;
    }
}

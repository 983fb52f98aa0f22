namespace VectorKit.Indexes;

/// <summary>
/// An index whose stored codes depend on statistics learnt from a sample (centroids, quantizer ranges or codebooks):
/// it must be trained before the first add or search.
/// </summary>
/// <remarks>
/// Generic code (a batch tool, a connector) can ask <see cref="IsTrained"/> and train on a sample of its data:
/// <code>
/// if (index is ITrainableIndex { IsTrained: false } trainable)
/// {
///     trainable.Train(sample);
/// }
/// </code>
/// An index configured to store float32 vectors needs no training and reports <see cref="IsTrained"/> as
/// <see langword="true"/> from the start.
/// </remarks>
public interface ITrainableIndex : IVectorIndex
{
    /// <summary>Whether the index is ready to take vectors: trained, or in need of no training.</summary>
    bool IsTrained { get; }

    /// <summary>Learns what the stored codes need from <paramref name="sample"/>; the sample's rows are not added.</summary>
    /// <param name="sample">Training rows, row after row, finite components; the implementation names the minimum row count.</param>
    /// <param name="progress">Optional; receives the stage and the work done.</param>
    /// <param name="cancellationToken">Stops training between steps; a cancelled training leaves the index as it was.</param>
    /// <exception cref="ArgumentException">The sample is malformed or too small; the message names the minimum.</exception>
    /// <exception cref="InvalidOperationException">The index already holds vectors whose codes depend on the current training.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    void Train(ReadOnlySpan<float> sample, IProgress<IndexTrainingProgress>? progress = null, CancellationToken cancellationToken = default);
}

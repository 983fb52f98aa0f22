using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using VectorKit.Quantization;
using VectorKit.Internal;

namespace VectorKit.Indexes.Exact;

/// <summary>8-bit storage: training the code ranges, encoding, the code scan, exact re-scoring and the batch.</summary>
public sealed partial class ExactIndex
{
    // Queries of a batch handed to one worker at a time.
    private const int CodeQueryBlock = 16;

    // A padded query up to this many floats lives on the stack.
    private const int StackQueryFloats = 1024;

    // Under cosine without kept full vectors, the unit vector being encoded; used under the write lock only.
    private float[] _unitScratch = [];

    /// <summary>
    /// Under <see cref="VectorEncoding.Scalar8Bit"/>, learns each component's code range (minimum and maximum) from
    /// <paramref name="sample"/>; under float32 storage it only validates the sample, since nothing is learnt.
    /// </summary>
    /// <param name="sample">
    /// Training rows, row after row: at least one row of finite components (no zero row under cosine, where the rows
    /// are scaled to unit length first, as they are stored). They are not added to the index. Components outside the
    /// learnt ranges are clamped when encoded, so the sample should cover the data to come.
    /// </param>
    /// <param name="progress">Optional; under 8-bit storage receives <see cref="IndexTrainingStage.TrainingQuantizer"/> 1 of 1 when the ranges are set. Float32 storage reports nothing.</param>
    /// <param name="cancellationToken">Checked between steps; a cancelled training leaves the index as it was.</param>
    /// <exception cref="ArgumentException">The sample is empty or not a multiple of the dimension (the message names the minimum of one row), has a non-finite component, or a zero row under cosine (the message names the row).</exception>
    /// <exception cref="InvalidOperationException">Under 8-bit storage, the index already holds vectors, whose codes depend on the current ranges.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public override void Train(ReadOnlySpan<float> sample, IProgress<IndexTrainingProgress>? progress = null, CancellationToken cancellationToken = default)
    {
        using (_lock.EnterRead())
        {
            // Fail before the work when the answer is known already (checked again under the write lock).
            ThrowIfDisposed();
            ThrowIfReadOnly();
            if (_codes is not null)
            {
                ThrowIfHoldingVectors();
            }
        }

        ScalarQuantizer? scalar = ScalarCodeTraining.Learn(sample, Dimension, Metric, _codes is not null, cancellationToken);
        if (scalar is null)
        {
            return;
        }

        using var gate = _writerGate.EnterRead();
        _lock.EnterWriteLock();
        try
        {
            ThrowIfDisposed();
            ThrowIfHoldingVectors();
            Volatile.Write(ref _scalar, scalar);
        }
        finally
        {
            _lock.ExitWriteLock();
        }

        progress?.Report(new IndexTrainingProgress(IndexTrainingStage.TrainingQuantizer, 1, 1));
    }

    private void ThrowIfHoldingVectors()
    {
        if (_count > 0)
        {
            throw new InvalidOperationException($"The index holds {_count} vectors, whose 8-bit codes depend on the current ranges; train before adding, or build a new index.");
        }
    }

    // Caller holds a lock; 8-bit storage without full vectors.
    private bool TryDecode(long id, Span<float> destination)
    {
        if (!_slotOf.TryGetValue(id, out int slot))
        {
            return false;
        }

        _scalar!.Decode(_codes!.RowSpan(slot), destination);
        return true;
    }

    // Encodes one validated vector into a slot's code (and keeps the full vector when re-scoring is on), normalised
    // under cosine; caller holds the write lock.
    private void StoreCode(int slot, ReadOnlySpan<float> vector)
    {
        ReadOnlySpan<float> row = vector;
        if (_keepsVectors)
        {
            Span<float> full = _vectors.RowSpan(slot);
            if (Metric == DistanceMetric.Cosine)
            {
                VectorChecks.Normalize(vector, full, nameof(vector));
            }
            else
            {
                vector.CopyTo(full);
            }

            row = full;
        }
        else if (Metric == DistanceMetric.Cosine)
        {
            if (_unitScratch.Length < Dimension)
            {
                _unitScratch = new float[Dimension];
            }

            Span<float> unit = _unitScratch.AsSpan(0, Dimension);
            VectorChecks.Normalize(vector, unit, nameof(vector));
            row = unit;
        }

        _scalar!.EncodeUnchecked(row, _codes!.RowSpan(slot));
    }

    // Caller holds the read lock and checked training; q is validated (unit length under cosine).
    private int SearchCodesLocked(ReadOnlySpan<float> q, Span<SearchHit> destination, SearchOptions options)
    {
        if (_count == 0)
        {
            return 0;
        }

        ScalarQuantizer scalar = _scalar!;
        int k = destination.Length;
        int depth = RescoreDepthFor(options);
        int candidates = Math.Min(Math.Max(k, depth), _count);

        // The candidates live in the destination unless re-scoring needs more of them than it holds.
        using var hits = ScratchRental<SearchHit>.Rent(candidates > k ? candidates : 0);
        Span<SearchHit> heap = candidates > k ? hits.Span : destination[..candidates];
        int padded = scalar.CodeBytes;
        using var paddedQuery = ScratchRental<float>.Rent(padded > StackQueryFloats ? padded : 0);
        Span<float> prepared = padded > StackQueryFloats ? paddedQuery.Span : stackalloc float[padded];

        // The query padded with zeros to the code length: padding meets decoded zeros and adds nothing.
        scalar.Pad(q, prepared);
        var scan = new ScanAction<CodeScanRows>(this, ref MemoryMarshal.GetReference(prepared), heap, options.Filter, new(scalar, _codes!, _kernelPath));
        int found = MetricDispatch.Run<ScanAction<CodeScanRows>, int>(Metric, ref scan);
        if (depth > 0)
        {
            RescoreLocked(_kernelPath, ref MemoryMarshal.GetReference(q), heap[..found], _keepsVectors ? _vectors : null);
        }

        TopK.SortBestFirst(heap, found);
        int keep = Math.Min(k, found);
        if (candidates > k)
        {
            heap[..keep].CopyTo(destination);
        }

        return keep;
    }
}

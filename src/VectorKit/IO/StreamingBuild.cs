using System.Diagnostics;
using VectorKit.Indexes;

namespace VectorKit.IO;

/// <summary>
/// Builds an index from a data file (.fvecs, .bvecs or .npy) without holding its vectors in memory: trains the index on
/// a sample of rows, then reads the file in blocks and adds each block. Row r gets id r, the id a
/// <see cref="FileVectorSource"/> on the same file reads it by, so an index with
/// <see cref="FullVectorLocation.ExternalSource"/> re-scores from the file it was built from (<see cref="OpenFullVectors"/>).
/// </summary>
/// <remarks>
/// <para><b>Memory.</b> The build's own buffers hold at most <see cref="StreamingBuildOptions.SampleSize"/> +
/// <see cref="StreamingBuildOptions.BlockRows"/> float32 rows (the sample only while training), plus one id per block
/// row; training works on copies of the sample (residuals, normalised rows under cosine), and the index holds what its
/// kind stores per item. A file larger than memory therefore fits when the index keeps no float32 vectors: the inverted
/// file under product or 8-bit codes and the 8-bit exact and graph indexes, each with re-scoring off or reading full
/// vectors from an external source. Other configurations work but grow by 4 × dimension bytes per row.</para>
/// <para><b>Reads.</b> The file is read sequentially twice: once up to the last training row, once whole (the first pass
/// is skipped when the index is already trained). A file whose length is not a whole number of rows is rejected before
/// anything is trained.</para>
/// <para><b>Failure.</b> A cancelled or failed build leaves the index trained and holding the blocks added before the
/// failure; discard it. Thread safety: the index's own rules apply; other threads may search it while it is built.</para>
/// </remarks>
public static class StreamingBuild
{
    /// <summary>Trains <paramref name="index"/> on a sample of the file's rows (unless it is trained) and adds every row, row r with id r.</summary>
    /// <param name="index">An empty index of the file's dimension, trained or not.</param>
    /// <param name="path">A .fvecs, .bvecs or .npy file (the extension decides; .npy of any numeric dtype, one row per vector).</param>
    /// <param name="options">Block size, sample size and pick, seed, read limits; <see langword="null"/> for <see cref="StreamingBuildOptions.Default"/>.</param>
    /// <param name="progress">Optional; receives each stage's work as it is done (synchronously, on the building thread).</param>
    /// <param name="cancellationToken">Checked between blocks and inside training and adds.</param>
    /// <returns>Rows added, training rows, and the buffer counts that bound the build's own memory.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="index"/> or <paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException">
    /// The extension is not .fvecs, .bvecs or .npy; the file's dimension differs from the index's; the file holds more
    /// rows than an index can (2³¹ − 1); or training rejects the sample (too few rows for the index, a zero row under cosine).
    /// </exception>
    /// <exception cref="InvalidOperationException">The index already holds vectors.</exception>
    /// <exception cref="IOException">The file cannot be opened or read.</exception>
    /// <exception cref="DataFormatException">
    /// The file is malformed, empty, truncated (not a whole number of rows, or shorter than at the first pass), or holds a
    /// non-finite component; the message names the file and, for a bad value, the rows of the block.
    /// </exception>
    /// <exception cref="OperationCanceledException"><paramref name="cancellationToken"/> was cancelled.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    public static StreamingBuildReport Build(
        VectorIndex index,
        string path,
        StreamingBuildOptions? options = null,
        IProgress<StreamingBuildProgress>? progress = null,
        CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(index);
        ArgumentNullException.ThrowIfNull(path);
        options ??= StreamingBuildOptions.Default;
        if (index.Count != 0)
        {
            DataFormatThrow.InvalidOperation($"The index holds {index.Count} vectors; a streamed build fills an empty index (row numbers become ids).");
        }

        FormatOf(path);
        return DataFiles.Named(path, () => BuildCore(index, path, options, progress, cancellationToken));
    }

    /// <summary>
    /// Opens the file as full vectors for re-scoring, by its extension (<see cref="FileVectorSource.OpenFvecs"/>,
    /// <see cref="FileVectorSource.OpenBvecs"/> or <see cref="FileVectorSource.OpenNpy"/>); row r is id r, as in <see cref="Build"/>.
    /// </summary>
    /// <param name="path">A .fvecs, .bvecs or .npy (<c>&lt;f4</c>) file.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <param name="reads">Positional reads (the default) or a read-only mapping of the file; see <see cref="FileVectorReads"/>.</param>
    /// <returns>A source that owns its file handle; dispose it after the index that reads from it.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="reads"/> is not a defined <see cref="FileVectorReads"/>.</exception>
    /// <exception cref="ArgumentException">The extension is not .fvecs, .bvecs or .npy.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">The file is malformed or truncated, or a .npy file's dtype is not <c>&lt;f4</c>.</exception>
    public static FileVectorSource OpenFullVectors(string path, DataReadLimits? limits = null, FileVectorReads reads = FileVectorReads.Positional)
    {
        ArgumentNullException.ThrowIfNull(path);
        return FormatOf(path) switch
        {
            ".fvecs" => FileVectorSource.OpenFvecs(path, null, limits, reads),
            ".bvecs" => FileVectorSource.OpenBvecs(path, null, limits, reads),
            _ => FileVectorSource.OpenNpy(path, null, limits, reads),
        };
    }

    private static string FormatOf(string path)
    {
        string extension = Path.GetExtension(path).ToLowerInvariant();
        if (extension is not (".fvecs" or ".bvecs" or ".npy"))
        {
            DataFormatThrow.Argument(nameof(path), $"'{path}' has the extension '{extension}'; a streamed build reads .fvecs, .bvecs or .npy files.");
        }

        return extension;
    }

    private static VectorReader Open(string path, DataReadLimits? limits) => FormatOf(path) switch
    {
        ".fvecs" => VecsReader.Open(path, VecsElementType.Float32, limits),
        ".bvecs" => VecsReader.Open(path, VecsElementType.UInt8, limits),
        _ => NpyReader.Open(path, limits),
    };

    private static StreamingBuildReport BuildCore(VectorIndex index, string path, StreamingBuildOptions options, IProgress<StreamingBuildProgress>? progress, CancellationToken cancellationToken)
    {
        var clock = Stopwatch.StartNew();
        int d = index.Dimension;
        var budget = new RowBudget();
        long count;
        int blockRows;
        float[] block;
        int trainingRows = 0;
        using (VectorReader reader = Open(path, options.Limits))
        {
            count = CheckShape(reader, path, d);
            blockRows = (int)Math.Min(options.BlockRows, Math.Min(count, Array.MaxLength / d));
            block = budget.Allocate(blockRows, d);
            if (!index.IsTrained)
            {
                trainingRows = (int)Math.Min(options.SampleSize, Math.Min(count, Array.MaxLength / d));
                float[] sample = budget.Allocate(trainingRows, d);
                long[] picks = Picks(count, trainingRows, options);
                ReadRows(reader, picks, block, sample, d, budget, progress, cancellationToken);
                progress?.Report(new StreamingBuildProgress(StreamingBuildStage.Training, 0, 1));
                try
                {
                    index.Train(sample, null, cancellationToken);
                }
                catch (ArgumentException e)
                {
                    throw new ArgumentException($"Training on {trainingRows} rows of '{path}' failed: {e.Message}", nameof(path), e);
                }

                // The sample also tells where the rows will fall: kinds with lists size them once for the whole load.
                index.PrepareBulkLoad(sample, count - index.Count, cancellationToken);
                budget.Release(trainingRows);
                progress?.Report(new StreamingBuildProgress(StreamingBuildStage.Training, 1, 1));
            }
        }

        long added = 0;
        long[] ids = new long[blockRows];
        progress?.Report(new StreamingBuildProgress(StreamingBuildStage.Adding, 0, count));
        using (VectorReader reader = Open(path, options.Limits))
        {
            CheckShape(reader, path, d);
            while (added < count)
            {
                int got = reader.ReadBlock(block.AsSpan(0, (int)Math.Min(blockRows, count - added) * d), cancellationToken);
                if (got == 0)
                {
                    DataFormatThrow.Malformed(FormatName(reader), $"the file ended after {added} of its {count} rows; it changed while it was read");
                }

                budget.SawRead(got);
                for (int i = 0; i < got; i++)
                {
                    ids[i] = added + i;
                }

                try
                {
                    index.AddRange(ids.AsSpan(0, got), block.AsSpan(0, got * d), null, cancellationToken);
                }
                catch (ArgumentException e)
                {
                    throw new DataFormatException($"{FormatName(reader)}: rows {added}–{added + got - 1}: {e.Message}", e);
                }

                added += got;
                progress?.Report(new StreamingBuildProgress(StreamingBuildStage.Adding, added, count));
            }
        }

        return new StreamingBuildReport(added, trainingRows, budget.Peak, budget.LargestRead, clock.Elapsed);
    }

    private static long CheckShape(VectorReader reader, string path, int dimension)
    {
        string format = FormatName(reader);
        if (reader.Count < 0)
        {
            DataFormatThrow.Malformed(format, $"the file's length is not a whole number of rows of dimension {reader.Dimension}; it is truncated or its rows differ in dimension");
        }

        if (reader.Count == 0)
        {
            DataFormatThrow.Malformed(format, "the file holds no vectors; a build needs at least one row to train on and add");
        }

        if (reader.Dimension != dimension)
        {
            DataFormatThrow.Argument(nameof(path), $"'{path}' holds vectors of dimension {reader.Dimension}; the index's dimension is {dimension}.");
        }

        if (reader.Count > int.MaxValue)
        {
            DataFormatThrow.Argument(nameof(path), $"'{path}' holds {reader.Count} rows; an index holds at most {int.MaxValue}.");
        }

        return reader.Count;
    }

    private static string FormatName(VectorReader reader)
        => reader is VecsReader vecs ? (vecs.ElementType == VecsElementType.UInt8 ? "bvecs" : "fvecs") : "npy";

    /// <summary>The training rows' numbers in ascending order.</summary>
    private static long[] Picks(long count, int n, StreamingBuildOptions options)
    {
        var picks = new long[n];
        if (options.TrainingRows == TrainingRowPick.Strided)
        {
            for (int i = 0; i < n; i++)
            {
                picks[i] = (long)((UInt128)(ulong)i * (ulong)count / (ulong)n);
            }

            return picks;
        }

        // Floyd's draw: n distinct rows of count with n set insertions, whatever the file's size.
        var random = new Random(options.Seed);
        var chosen = new HashSet<long>(n);
        for (long j = count - n; j < count; j++)
        {
            long t = random.NextInt64(j + 1);
            chosen.Add(chosen.Contains(t) ? j : t);
        }

        chosen.CopyTo(picks);
        Array.Sort(picks);
        return picks;
    }

    private static void ReadRows(VectorReader reader, long[] picks, float[] block, float[] sample, int d, RowBudget budget, IProgress<StreamingBuildProgress>? progress, CancellationToken cancellationToken)
    {
        long last = picks[^1] + 1;
        int blockRows = block.Length / d;
        long row = 0;
        int next = 0;
        progress?.Report(new StreamingBuildProgress(StreamingBuildStage.ReadingSample, 0, last));
        while (row < last)
        {
            int got = reader.ReadBlock(block.AsSpan(0, (int)Math.Min(blockRows, last - row) * d), cancellationToken);
            if (got == 0)
            {
                DataFormatThrow.Malformed(FormatName(reader), $"the file ended after {row} rows, before training row {picks[next]}");
            }

            budget.SawRead(got);
            while (next < picks.Length && picks[next] < row + got)
            {
                block.AsSpan((int)(picks[next] - row) * d, d).CopyTo(sample.AsSpan(next * d));
                next++;
            }

            row += got;
            progress?.Report(new StreamingBuildProgress(StreamingBuildStage.ReadingSample, row, last));
        }
    }

    /// <summary>Counts the float32 rows the build's buffers hold, so tests can check the stated bound without measuring the heap.</summary>
    private sealed class RowBudget
    {
        private long _held;

        public long Peak { get; private set; }

        public int LargestRead { get; private set; }

        public float[] Allocate(int rows, int d)
        {
            _held += rows;
            Peak = Math.Max(Peak, _held);
            return new float[(long)rows * d];
        }

        public void Release(int rows) => _held -= rows;

        public void SawRead(int rows) => LargestRead = Math.Max(LargestRead, rows);
    }
}

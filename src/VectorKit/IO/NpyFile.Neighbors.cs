using System.Buffers;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Internal;

namespace VectorKit.IO;

/// <summary>int64 matrices, search results as (queries, K) id and distance arrays, and neighbour files read back with 64-bit ids.</summary>
public static partial class NpyFile
{
    /// <summary>Writes row-major int64 rows (for example 64-bit ids) as a (rows, <paramref name="dimension"/>) <c>&lt;i8</c> array.</summary>
    /// <param name="stream">The destination; left open.</param>
    /// <param name="data">The rows, one after another.</param>
    /// <param name="dimension">The values per row, at least 1.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is less than 1.</exception>
    /// <exception cref="ArgumentException">
    /// <paramref name="stream"/> cannot be written, or the length of <paramref name="data"/> is not a multiple of <paramref name="dimension"/>.
    /// </exception>
    public static void Write(Stream stream, ReadOnlySpan<long> data, int dimension)
    {
        int rows = CheckWrite(stream, data.Length, dimension);
        WriteHeader(stream, "<i8", $"({rows}, {dimension})");
        LittleEndianWriter.Write(stream, data);
    }

    /// <summary>
    /// Writes batch search results as a (QueryCount, K) <c>&lt;i8</c> array of ids and, optionally, a (QueryCount, K)
    /// <c>&lt;f4</c> array of distances, one row per query, best first.
    /// </summary>
    /// <param name="ids">The destination of the ids; left open.</param>
    /// <param name="distances">The destination of the distances, or <see langword="null"/> to write ids only; left open.</param>
    /// <param name="results">The results to write.</param>
    /// <remarks>
    /// A query with fewer than <see cref="BatchSearchResults.K"/> hits is padded with id −1 and distance +∞;
    /// <see cref="ReadNeighbors(Stream, DataReadLimits?)"/> drops a trailing run of −1, so id −1 is not allowed in the
    /// results. In NumPy the files load as <c>np.load(path)</c>: an int64 and a float32 array of shape (QueryCount, K).
    /// All ids are checked before anything is written.
    /// </remarks>
    /// <exception cref="ArgumentNullException"><paramref name="ids"/> or <paramref name="results"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException">A stream cannot be written, or an id is −1 (the message names the query and the rank).</exception>
    public static void WriteNeighbors(Stream ids, Stream? distances, BatchSearchResults results)
    {
        DataFiles.CheckWritable(ids);
        if (distances is not null && !distances.CanWrite)
        {
            DataFormatThrow.Argument(nameof(distances), "The distances stream does not support writing.");
        }

        if (results is null)
        {
            DataFormatThrow.ArgumentNull(nameof(results));
        }

        NeighborFiles.CheckIds(results, int32Ids: false, ".npy");
        WriteNeighborArrays(ids, distances, results);
    }

    /// <summary>
    /// Writes batch search results to a .npy file of int64 ids and, optionally, a .npy file of float32 distances,
    /// creating or replacing them atomically; see <see cref="WriteNeighbors(Stream, Stream?, BatchSearchResults)"/>.
    /// </summary>
    /// <param name="idsPath">The path of the id array.</param>
    /// <param name="distancesPath">The path of the distance array, or <see langword="null"/> to write ids only.</param>
    /// <param name="results">The results to write.</param>
    /// <remarks>
    /// The ids are checked before anything is written. Each file is written to a hidden temporary file beside it; both
    /// are flushed to the disk, then renamed over their targets, ids first. A failure before the renames (a missing
    /// folder, a full disk) deletes the temporaries and leaves any previous files as they were; a crash between the two
    /// renames can leave the new id file beside the previous distance file.
    /// </remarks>
    /// <exception cref="ArgumentNullException"><paramref name="idsPath"/> or <paramref name="results"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException">An id is −1 (the message names the query and the rank), or a path is empty or names a folder.</exception>
    /// <exception cref="IOException">Creating, writing or renaming a temporary file failed; the message names the target file and the step.</exception>
    public static void WriteNeighbors(string idsPath, string? distancesPath, BatchSearchResults results)
    {
        if (idsPath is null)
        {
            DataFormatThrow.ArgumentNull(nameof(idsPath));
        }

        if (results is null)
        {
            DataFormatThrow.ArgumentNull(nameof(results));
        }

        NeighborFiles.CheckIds(results, int32Ids: false, ".npy");
        using DurableFile idFile = DataFiles.BeginReplace(idsPath, nameof(idsPath));
        using DurableFile? distanceFile = distancesPath is null ? null : DataFiles.BeginReplace(distancesPath, nameof(distancesPath));

        // One file at a time, so a failure names the file it happened in; both reach the disk before either is renamed.
        idFile.Write(stream => WriteNeighborArrays(stream, null, results));
        distanceFile?.Write(stream => WriteNeighborArrays(null, stream, results));
        idFile.FlushToDisk();
        distanceFile?.FlushToDisk();
        idFile.Commit();
        distanceFile?.Commit();
    }

    /// <summary>
    /// Reads an integer .npy array of neighbour ids (ground truth, or results written by
    /// <see cref="WriteNeighbors(Stream, Stream?, BatchSearchResults)"/>) as 64-bit ids, whatever its integer dtype.
    /// </summary>
    /// <param name="stream">The stream, positioned at the magic bytes.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>
    /// One row per array row, best first, with the row length as <see cref="NeighborTable.K"/> (a 1-D array reads as rows of
    /// one id). A trailing run of −1 in a row marks empty slots and is dropped.
    /// </returns>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="DataFormatException">The file is malformed, unsupported, truncated or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The dtype is floating-point, or the data does not fit in one array.</exception>
    public static NeighborTable ReadNeighbors(Stream stream, DataReadLimits? limits = null)
    {
        using var reader = new NpyReader(stream, leaveOpen: true, limits);
        return NeighborFiles.ToTable(reader.ReadToEndAsInt64(), reader.Dimension);
    }

    /// <summary>Reads an integer .npy array of neighbour ids as 64-bit ids; see <see cref="ReadNeighbors(Stream, DataReadLimits?)"/>.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>One row per array row, best first, trailing −1 dropped.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">The file is malformed, unsupported, truncated or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The dtype is floating-point, or the data does not fit in one array.</exception>
    public static NeighborTable ReadNeighbors(string path, DataReadLimits? limits = null)
    {
        using NpyReader reader = NpyReader.Open(path, limits);
        return DataFiles.Named(path, () => NeighborFiles.ToTable(reader.ReadToEndAsInt64(), reader.Dimension));
    }

    private static void WriteNeighborArrays(Stream? ids, Stream? distances, BatchSearchResults results)
    {
        int k = results.K;
        string shape = $"({results.QueryCount}, {k})";
        if (ids is not null)
        {
            WriteHeader(ids, "<i8", shape);
        }

        if (distances is not null)
        {
            WriteHeader(distances, "<f4", shape);
        }

        // Rows go out in chunks so a batch of millions of queries needs a buffer of a few thousand values, not the matrix.
        int rowsPerChunk = NeighborFiles.RowsPerChunk(k);
        long[] idChunk = ArrayPool<long>.Shared.Rent(rowsPerChunk * k);
        float[] distanceChunk = ArrayPool<float>.Shared.Rent(rowsPerChunk * k);
        try
        {
            for (int first = 0; first < results.QueryCount; first += rowsPerChunk)
            {
                int rows = Math.Min(rowsPerChunk, results.QueryCount - first);
                for (int r = 0; r < rows; r++)
                {
                    ReadOnlySpan<SearchHit> hits = results[first + r];
                    NeighborFiles.FillIds(hits, idChunk.AsSpan(r * k, k));
                    NeighborFiles.FillDistances(hits, distanceChunk.AsSpan(r * k, k));
                }

                if (ids is not null)
                {
                    LittleEndianWriter.Write(ids, idChunk.AsSpan(0, rows * k));
                }

                if (distances is not null)
                {
                    LittleEndianWriter.Write(distances, distanceChunk.AsSpan(0, rows * k));
                }
            }
        }
        finally
        {
            ArrayPool<long>.Shared.Return(idChunk);
            ArrayPool<float>.Shared.Return(distanceChunk);
        }
    }
}

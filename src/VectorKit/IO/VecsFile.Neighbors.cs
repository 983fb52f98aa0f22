using System.Buffers;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Internal;

namespace VectorKit.IO;

/// <summary>Search results as .ivecs ids and .fvecs distances, and .ivecs neighbour files read back with 64-bit ids.</summary>
public static partial class VecsFile
{
    /// <summary>
    /// Writes batch search results as an .ivecs file of ids and, optionally, an .fvecs file of distances: one row of
    /// <see cref="BatchSearchResults.K"/> values per query, best first.
    /// </summary>
    /// <param name="ids">The destination of the ids; left open.</param>
    /// <param name="distances">The destination of the distances, or <see langword="null"/> to write ids only; left open.</param>
    /// <param name="results">The results to write.</param>
    /// <remarks>
    /// <para>Every row has <see cref="BatchSearchResults.K"/> values. A query with fewer hits (a small collection, or a
    /// filter) is padded with id −1 and distance +∞; <see cref="ReadNeighbors(Stream, DataReadLimits?)"/> drops a
    /// trailing run of −1, so the rows read back have the lengths written. Id −1 is therefore not allowed in the results.</para>
    /// <para>.ivecs holds int32, so every id must lie in [−2³¹, 2³¹ − 1]; <see cref="NpyFile.WriteNeighbors(Stream, Stream?, BatchSearchResults)"/>
    /// stores int64 ids. All ids are checked before anything is written. Results with no queries write nothing.</para>
    /// </remarks>
    /// <exception cref="ArgumentNullException"><paramref name="ids"/> or <paramref name="results"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException">
    /// A stream cannot be written, or an id is outside the int32 range or is −1 (the message names the query, the rank and the id).
    /// </exception>
    public static void WriteNeighbors(Stream ids, Stream? distances, BatchSearchResults results)
    {
        DataFiles.CheckWritable(ids);
        if (distances is not null)
        {
            CheckWritableDistances(distances);
        }

        if (results is null)
        {
            DataFormatThrow.ArgumentNull(nameof(results));
        }

        NeighborFiles.CheckIds(results, int32Ids: true, ".ivecs");
        WriteNeighborRows(ids, distances, results);
    }

    /// <summary>
    /// Writes batch search results to an .ivecs file of ids and, optionally, an .fvecs file of distances, creating or
    /// replacing them atomically; see <see cref="WriteNeighbors(Stream, Stream?, BatchSearchResults)"/> for the layout and padding.
    /// </summary>
    /// <param name="idsPath">The .ivecs file path.</param>
    /// <param name="distancesPath">The .fvecs file path, or <see langword="null"/> to write ids only.</param>
    /// <param name="results">The results to write.</param>
    /// <remarks>
    /// The ids are checked before anything is written. Each file is written to a hidden temporary file beside it; both
    /// are flushed to the disk, then renamed over their targets, ids first. A failure before the renames (a missing
    /// folder, a full disk) deletes the temporaries and leaves any previous files as they were; a crash between the two
    /// renames can leave the new id file beside the previous distance file.
    /// </remarks>
    /// <exception cref="ArgumentNullException"><paramref name="idsPath"/> or <paramref name="results"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException">An id is outside the int32 range or is −1 (the message names the query, the rank and the id), or a path is empty or names a folder.</exception>
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

        NeighborFiles.CheckIds(results, int32Ids: true, ".ivecs");
        using DurableFile idFile = DataFiles.BeginReplace(idsPath, nameof(idsPath));
        using DurableFile? distanceFile = distancesPath is null ? null : DataFiles.BeginReplace(distancesPath, nameof(distancesPath));

        // One file at a time, so a failure names the file it happened in; both reach the disk before either is renamed.
        idFile.Write(stream => WriteNeighborRows(stream, null, results));
        distanceFile?.Write(stream => WriteNeighborRows(null, stream, results));
        idFile.FlushToDisk();
        distanceFile?.FlushToDisk();
        idFile.Commit();
        distanceFile?.Commit();
    }

    /// <summary>Reads an .ivecs file of neighbour ids (ground truth, or results written by <see cref="WriteNeighbors(Stream, Stream?, BatchSearchResults)"/>) as 64-bit ids.</summary>
    /// <param name="stream">The stream, positioned at the first row.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>
    /// One row per file row, best first, with the file's dimension as <see cref="NeighborTable.K"/>. A trailing run of −1
    /// in a row marks empty slots and is dropped. An empty file gives a table with no rows and K = 0.
    /// </returns>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="DataFormatException">The file is truncated, has rows of different dimensions, or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    public static NeighborTable ReadNeighbors(Stream stream, DataReadLimits? limits = null)
    {
        using var reader = new VecsReader(stream, VecsElementType.Int32, leaveOpen: true, limits);
        return NeighborFiles.ToTable(reader.ReadToEndAsInt64(), reader.Dimension);
    }

    /// <summary>Reads an .ivecs file of neighbour ids as 64-bit ids; see <see cref="ReadNeighbors(Stream, DataReadLimits?)"/>.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>One row per file row, best first, trailing −1 dropped.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">The file is truncated, has rows of different dimensions, or exceeds a limit.</exception>
    /// <exception cref="InvalidOperationException">The data does not fit in one array.</exception>
    public static NeighborTable ReadNeighbors(string path, DataReadLimits? limits = null)
    {
        using VecsReader reader = VecsReader.Open(path, VecsElementType.Int32, limits);
        return DataFiles.Named(path, () => NeighborFiles.ToTable(reader.ReadToEndAsInt64(), reader.Dimension));
    }

    private static void CheckWritableDistances(Stream distances)
    {
        if (!distances.CanWrite)
        {
            DataFormatThrow.Argument(nameof(distances), "The distances stream does not support writing.");
        }
    }

    private static void WriteNeighborRows(Stream? ids, Stream? distances, BatchSearchResults results)
    {
        int k = results.K;
        int[] idRow = ArrayPool<int>.Shared.Rent(k);
        float[] distanceRow = ArrayPool<float>.Shared.Rent(k);
        try
        {
            for (int q = 0; q < results.QueryCount; q++)
            {
                ReadOnlySpan<SearchHit> hits = results[q];
                if (ids is not null)
                {
                    NeighborFiles.FillIds(hits, idRow.AsSpan(0, k));
                    LittleEndianWriter.WriteInt32(ids, k);
                    LittleEndianWriter.Write(ids, idRow.AsSpan(0, k));
                }

                if (distances is not null)
                {
                    NeighborFiles.FillDistances(hits, distanceRow.AsSpan(0, k));
                    LittleEndianWriter.WriteInt32(distances, k);
                    LittleEndianWriter.Write(distances, distanceRow.AsSpan(0, k));
                }
            }
        }
        finally
        {
            ArrayPool<int>.Shared.Return(idRow);
            ArrayPool<float>.Shared.Return(distanceRow);
        }
    }
}

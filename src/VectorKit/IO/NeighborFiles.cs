using VectorKit.Evaluation;
using VectorKit.Indexes;

namespace VectorKit.IO;

/// <summary>
/// The conventions shared by the neighbour-file writers and readers (<see cref="VecsFile"/>, <see cref="NpyFile"/>):
/// one row of <see cref="BatchSearchResults.K"/> slots per query, best first, empty slots padded with id
/// <see cref="EmptyId"/> and distance +∞.
/// </summary>
internal static class NeighborFiles
{
    /// <summary>The id written into a slot a query did not fill; readers drop a trailing run of it.</summary>
    public const long EmptyId = -1;

    // Rows are written in chunks of about this many values, so a large batch never needs a whole-matrix buffer.
    private const int ChunkValues = 1 << 14;

    /// <summary>
    /// Throws on the first id that cannot be written: one outside int32 when <paramref name="int32Ids"/> (the .ivecs
    /// element), or the padding marker <see cref="EmptyId"/> itself, which would read back as an empty slot.
    /// </summary>
    public static void CheckIds(BatchSearchResults results, bool int32Ids, string fileKind)
    {
        for (int q = 0; q < results.QueryCount; q++)
        {
            ReadOnlySpan<SearchHit> hits = results[q];
            for (int rank = 0; rank < hits.Length; rank++)
            {
                long id = hits[rank].Id;
                if (id == EmptyId)
                {
                    DataFormatThrow.Argument(
                        nameof(results),
                        $"results query {q}, rank {rank} has id {EmptyId}, which {fileKind} neighbour files reserve for an empty slot (rows with fewer than K hits are padded with it); use ids other than {EmptyId}.");
                }

                if (int32Ids && id is < int.MinValue or > int.MaxValue)
                {
                    DataFormatThrow.Argument(
                        nameof(results),
                        $"results query {q}, rank {rank} has id {id}, outside the int32 range [{int.MinValue}, {int.MaxValue}] that {fileKind} files hold; write a .npy file (NpyFile.WriteNeighbors stores int64 ids) instead.");
                }
            }
        }
    }

    /// <summary>Rows per write chunk for rows of <paramref name="k"/> values: at least one.</summary>
    public static int RowsPerChunk(int k) => Math.Max(1, ChunkValues / k);

    /// <summary>Copies one query's hits into a row of K slots, padding the rest.</summary>
    public static void FillIds(ReadOnlySpan<SearchHit> hits, Span<long> row)
    {
        for (int j = 0; j < hits.Length; j++)
        {
            row[j] = hits[j].Id;
        }

        row[hits.Length..].Fill(EmptyId);
    }

    /// <summary>Copies one query's ids into a row of K int32 slots, padding the rest; the ids were checked by <see cref="CheckIds"/>.</summary>
    public static void FillIds(ReadOnlySpan<SearchHit> hits, Span<int> row)
    {
        for (int j = 0; j < hits.Length; j++)
        {
            row[j] = (int)hits[j].Id;
        }

        row[hits.Length..].Fill((int)EmptyId);
    }

    /// <summary>Copies one query's distances into a row of K slots, padding the rest with +∞.</summary>
    public static void FillDistances(ReadOnlySpan<SearchHit> hits, Span<float> row)
    {
        for (int j = 0; j < hits.Length; j++)
        {
            row[j] = hits[j].Distance;
        }

        row[hits.Length..].Fill(float.PositiveInfinity);
    }

    /// <summary>Builds a table from row-major ids of <paramref name="k"/> slots per row, dropping each row's trailing <see cref="EmptyId"/> run.</summary>
    public static NeighborTable ToTable(long[] ids, int k)
    {
        int rows = k == 0 ? 0 : ids.Length / k;
        var counts = new int[rows];
        for (int q = 0; q < rows; q++)
        {
            ReadOnlySpan<long> row = ids.AsSpan(q * k, k);
            int count = k;
            while (count > 0 && row[count - 1] == EmptyId)
            {
                count--;
            }

            counts[q] = count;
        }

        return new NeighborTable(ids, counts, k);
    }
}

using System.Runtime.InteropServices;
using VectorKit.Indexes;
using VectorKit.Internal;

namespace VectorKit.Persistence;

/// <summary>Bulk helpers shared by the codecs.</summary>
internal static class FileBlocks
{
    private const int BlockBytes = 1 << 20;

    /// <summary>Writes rows [0, rows) of a vector buffer in blocks of about 1 MiB (a buffer may exceed one span's reach).</summary>
    public static void WriteRows(IndexFileWriter writer, VectorBuffer vectors, int rows)
    {
        int d = vectors.Dimension;
        int blockRows = Math.Max(1, BlockBytes / (d * sizeof(float)));
        for (int start = 0; start < rows; start += blockRows)
        {
            int n = Math.Min(blockRows, rows - start);
            writer.Write<float>(MemoryMarshal.CreateReadOnlySpan(ref vectors.Row(start), n * d));
        }
    }
}

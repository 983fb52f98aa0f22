using System.Runtime.InteropServices;
using VectorKit.Distance;
using VectorKit.Indexes.Exact;
using VectorKit.Internal;

namespace VectorKit.Persistence;

/// <summary>Writes several float32 exact indexes, minus masked ids, as one exact index file (a <see cref="SegmentedIndex"/>'s save and merge).</summary>
internal sealed partial class ExactIndexCodec
{
    /// <summary>One layer: an index whose rows stay still while it is written, and the ids of it that are not to be written.</summary>
    internal readonly record struct Layer(ExactIndex Index, IReadOnlySet<long>? Masked);

    /// <summary>
    /// Writes the layers' live rows, in layer order, as one float32 exact index (format version 3, with its id order).
    /// The caller guarantees no layer is written to meanwhile and that no id is live in two layers.
    /// </summary>
    public static void WriteLayers(Stream destination, int dimension, DistanceMetric metric, IReadOnlyList<Layer> layers, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        var parts = new List<(int Count, IdColumn Ids, VectorBuffer Vectors, IReadOnlySet<long>? Masked)>();
        long total = 0;
        foreach (Layer layer in layers)
        {
            (int count, IdColumn ids, VectorBuffer vectors) = layer.Index.ExportParts((c, i, v) => (c, i, v));
            int masked = 0;
            if (layer.Masked is { Count: > 0 } mask)
            {
                for (int slot = 0; slot < count; slot++)
                {
                    masked += mask.Contains(ids[slot]) ? 1 : 0;
                }
            }

            parts.Add((count, ids, vectors, layer.Masked));
            total += count - masked;
        }

        if (total > Array.MaxLength)
        {
            throw new InvalidOperationException($"The segments hold {total} items together; one index holds at most {Array.MaxLength}.");
        }

        int n = (int)total;
        var header = new IndexHeader { Kind = IndexKind.Exact, Metric = metric, Dimension = dimension, Count = n, Rows = n };
        header.Sections.Add(new SectionEntry((uint)SectionId.Ids, 0, checked((long)n * sizeof(long))));
        header.Sections.Add(new SectionEntry((uint)SectionId.Vectors, 0, checked((long)n * dimension * sizeof(float))));
        AddIdOrder(header, n);
        var buffered = new BufferedStream(destination, 1 << 20);
        var writer = new IndexFileWriter(buffered, cancellationToken);
        writer.WriteHeader(header);

        // Ids, remembered for the order.
        long[] keys = new long[n];
        int row = 0;
        writer.BeginSection(SectionId.Ids);
        foreach ((int count, IdColumn ids, _, IReadOnlySet<long>? masked) in parts)
        {
            for (int slot = 0; slot < count; slot++)
            {
                if (masked is null || !masked.Contains(ids[slot]))
                {
                    keys[row++] = ids[slot];
                }
            }
        }

        writer.Write<long>(keys);
        writer.EndSection();

        // Rows, in runs of consecutive kept slots of at most about 1 MiB.
        writer.BeginSection(SectionId.Vectors);
        int blockRows = Math.Max(1, BlockBytes / (dimension * sizeof(float)));
        int written = 0;
        foreach ((int count, IdColumn ids, VectorBuffer vectors, IReadOnlySet<long>? masked) in parts)
        {
            int slot = 0;
            while (slot < count)
            {
                if (masked is not null && masked.Contains(ids[slot]))
                {
                    slot++;
                    continue;
                }

                int start = slot;
                while (slot < count && slot - start < blockRows && (masked is null || !masked.Contains(ids[slot])))
                {
                    slot++;
                }

                writer.Write<float>(MemoryMarshal.CreateReadOnlySpan(ref vectors.Row(start), (slot - start) * dimension));
                written += slot - start;
                progress?.Report(written);
            }
        }

        writer.EndSection();
        int[] order = new int[n];
        for (int i = 0; i < n; i++)
        {
            order[i] = i;
        }

        Array.Sort(keys, order);
        writer.BeginSection(SectionId.IdOrder);
        writer.Write<int>(order);
        writer.EndSection();
        writer.Finish();
        buffered.Flush();
    }
}

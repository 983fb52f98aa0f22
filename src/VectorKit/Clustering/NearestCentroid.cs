using System.Buffers;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Distance.Kernels;

namespace VectorKit.Clustering;

/// <summary>
/// Assigns rows to their nearest centroid (squared Euclidean) with the blocked kernel: blocks of rows against
/// cache-sized tiles of centroids, in parallel over row blocks. Shared by k-means and the inverted-file index.
/// </summary>
/// <remarks>
/// Ties go to the lower centroid number, and each row's result depends on that row alone, so the assignment is the
/// same for any degree of parallelism.
/// </remarks>
internal static unsafe class NearestCentroid
{
    // Rows per work item, and the bytes of centroids swept per kernel call (kept in L2 while 4 rows at a time pass).
    private const int RowBlock = 64;
    private const int TileBytes = 256 * 1024;

    /// <summary>Writes, for each of <paramref name="rowCount"/> rows, the nearest centroid and its squared distance.</summary>
    public static void Assign(
        KernelPath path,
        float* rows,
        int rowCount,
        float[] centroids,
        int centroidCount,
        int dimension,
        Span<int> labels,
        Span<float> distances,
        int parallelism,
        CancellationToken cancellationToken)
    {
        if (rowCount == 0)
        {
            return;
        }

        int tileRows = Math.Max(4, Math.Min(centroidCount, TileBytes / (dimension * sizeof(float))) / 4 * 4);
        int blocks = (rowCount + RowBlock - 1) / RowBlock;
        fixed (int* labelPointer = labels)
        fixed (float* distancePointer = distances)
        {
            var work = new Work((nint)rows, rowCount, centroids, centroidCount, dimension, tileRows, path, (nint)labelPointer, (nint)distancePointer);
            // Each block's distances to one tile of centroids, rented: a single add assigns one row, and a fresh
            // array sized for a whole block of rows would be a large object per add.
            int scratchLength = Math.Min(RowBlock, rowCount) * tileRows;
            if (blocks == 1 || parallelism == 1)
            {
                float[] scratch = ArrayPool<float>.Shared.Rent(scratchLength);
                try
                {
                    for (int b = 0; b < blocks; b++)
                    {
                        cancellationToken.ThrowIfCancellationRequested();
                        work.Block(b, scratch);
                    }
                }
                finally
                {
                    ArrayPool<float>.Shared.Return(scratch);
                }

                return;
            }

            var options = new ParallelOptions { MaxDegreeOfParallelism = parallelism, CancellationToken = cancellationToken };
            Parallel.For(0, blocks, options, () => ArrayPool<float>.Shared.Rent(scratchLength), (b, _, scratch) => work.Block(b, scratch), static scratch => ArrayPool<float>.Shared.Return(scratch));
        }
    }

    /// <summary>The nearest centroid of one vector, and its squared distance.</summary>
    public static int One(KernelPath path, ReadOnlySpan<float> vector, ReadOnlySpan<float> centroids, int centroidCount, out float distance)
    {
        int d = vector.Length;
        ref float q = ref MemoryMarshal.GetReference(vector);
        ref float c = ref MemoryMarshal.GetReference(centroids);
        Span<float> block = stackalloc float[256];
        int best = 0;
        float bestDistance = float.PositiveInfinity;
        for (int start = 0; start < centroidCount; start += block.Length)
        {
            int count = Math.Min(block.Length, centroidCount - start);
            ManyKernel.Compute<SquaredDifferenceStep>(path, ref q, ref Unsafe.Add(ref c, (nint)start * d), d, count, ref MemoryMarshal.GetReference(block));
            for (int j = 0; j < count; j++)
            {
                if (block[j] < bestDistance)
                {
                    bestDistance = block[j];
                    best = start + j;
                }
            }
        }

        distance = bestDistance;
        return best;
    }

    private sealed class Work(nint rows, int rowCount, float[] centroids, int centroidCount, int dimension, int tileRows, KernelPath path, nint labels, nint distances)
    {
        public float[] Block(int block, float[] scratch)
        {
            int first = block * RowBlock;
            int count = Math.Min(RowBlock, rowCount - first);
            int d = dimension;
            ref float blockRows = ref Unsafe.AsRef<float>((float*)rows + ((nint)first * d));
            ref float output = ref MemoryMarshal.GetArrayDataReference(scratch);
            ref float centroidBase = ref MemoryMarshal.GetArrayDataReference(centroids);
            int* label = (int*)labels + first;
            float* best = (float*)distances + first;
            for (int i = 0; i < count; i++)
            {
                best[i] = float.PositiveInfinity;
                label[i] = 0;
            }

            for (int start = 0; start < centroidCount; start += tileRows)
            {
                int tile = Math.Min(tileRows, centroidCount - start);
                BlockKernel.Compute<SquaredDifferenceStep>(path, ref blockRows, count, ref Unsafe.Add(ref centroidBase, (nint)start * d), tile, d, ref output, tileRows);
                for (int i = 0; i < count; i++)
                {
                    ref float row = ref Unsafe.Add(ref output, (nint)i * tileRows);
                    float bestDistance = best[i];
                    int bestLabel = label[i];
                    for (int j = 0; j < tile; j++)
                    {
                        float value = Unsafe.Add(ref row, j);
                        if (value < bestDistance)
                        {
                            bestDistance = value;
                            bestLabel = start + j;
                        }
                    }

                    best[i] = bestDistance;
                    label[i] = bestLabel;
                }
            }

            return scratch;
        }
    }
}

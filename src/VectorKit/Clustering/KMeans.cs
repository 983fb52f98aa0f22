using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Distance.Kernels;
using VectorKit.Internal;

namespace VectorKit.Clustering;

/// <summary>
/// k-means clustering under squared Euclidean distance: k-means++ seeding (Arthur &amp; Vassilvitskii, SODA 2007), then
/// Lloyd iterations whose assignment step runs on the blocked distance kernel, in parallel.
/// </summary>
/// <remarks>
/// <para><b>Sampling.</b> Inputs larger than <see cref="KMeansOptions.SampleSize"/> are sampled uniformly without
/// replacement; the centroids are trained on the sample only.</para>
/// <para><b>Empty clusters.</b> A cluster left without rows is re-seeded with the row farthest from its own centroid
/// (taken from a cluster that keeps at least one other row), which lowers the objective, so the objective never
/// increases between iterations.</para>
/// <para><b>Reproducible.</b> The same input, options and seed give bit-identical centroids whatever the number of
/// threads: each row's assignment depends on that row alone, and sums are accumulated in a fixed order.</para>
/// <para><b>Thread safety.</b> Static and re-entrant; the input is only read.</para>
/// </remarks>
public static class KMeans
{
    /// <summary>Clusters the rows of <paramref name="vectors"/> into <see cref="KMeansOptions.ClusterCount"/> clusters.</summary>
    /// <param name="vectors">The training rows, row after row: a multiple of <paramref name="dimension"/> finite components.</param>
    /// <param name="dimension">Components per row, at least 1.</param>
    /// <param name="options">Cluster count, iterations, sample size, seed, threads; <see langword="null"/> for <see cref="KMeansOptions.Default"/>.</param>
    /// <param name="progress">Optional; receives a report per centroid seeded (every 64th) and per iteration.</param>
    /// <param name="cancellationToken">Stops seeding and iterating between steps.</param>
    /// <returns>The centroids, the objective after each iteration, and whether training converged.</returns>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is not positive.</exception>
    /// <exception cref="ArgumentException">The length is not a multiple of the dimension, a component is not finite, or there are fewer rows than clusters (the message names the minimum).</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public static KMeansResult Train(
        ReadOnlySpan<float> vectors,
        int dimension,
        KMeansOptions? options = null,
        IProgress<KMeansProgress>? progress = null,
        CancellationToken cancellationToken = default)
        => Train(vectors, dimension, options, progress, cancellationToken, KernelDispatch.Widest);

    internal static unsafe KMeansResult Train(
        ReadOnlySpan<float> vectors,
        int dimension,
        KMeansOptions? options,
        IProgress<KMeansProgress>? progress,
        CancellationToken cancellationToken,
        KernelPath path)
    {
        options ??= KMeansOptions.Default;
        if (dimension <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(dimension), dimension, "must be positive");
        }

        if (vectors.Length % dimension != 0)
        {
            ThrowHelper.ThrowArgument(nameof(vectors), $"vectors has {vectors.Length} components, not a multiple of the dimension {dimension}.");
        }

        int n = vectors.Length / dimension;
        int k = options.ClusterCount;
        if (n < k)
        {
            ThrowHelper.ThrowArgument(nameof(vectors), $"vectors has {n} rows; k-means with {k} clusters needs at least {k} training rows.");
        }

        VectorChecks.CheckFinite(vectors, nameof(vectors), 0, dimension);
        var random = new Random(options.Seed);
        float[] sample = Sample(vectors, dimension, options.EffectiveSampleSize, random);
        int rows = sample.Length / dimension;
        int parallelism = options.EffectiveParallelism;

        fixed (float* data = sample)
        {
            float[] centroids = SeedPlusPlus(path, data, rows, dimension, k, random, parallelism, progress, cancellationToken);
            var labels = new int[rows];
            var distances = new float[rows];
            var previous = new int[rows];
            var objectives = new List<double>(options.MaxIterations + 1);
            NearestCentroid.Assign(path, data, rows, centroids, k, dimension, labels, distances, parallelism, cancellationToken);
            objectives.Add(Sum(distances));
            bool converged = false;
            int repaired = 0;
            var sums = new double[k * dimension];
            var counts = new int[k];
            for (int iteration = 0; iteration < options.MaxIterations; iteration++)
            {
                cancellationToken.ThrowIfCancellationRequested();
                repaired += Update(data, rows, dimension, k, labels, distances, centroids, sums, counts);
                labels.AsSpan().CopyTo(previous);
                NearestCentroid.Assign(path, data, rows, centroids, k, dimension, labels, distances, parallelism, cancellationToken);
                double objective = Sum(distances);
                double before = objectives[^1];
                objectives.Add(objective);
                progress?.Report(new KMeansProgress(KMeansStage.Iterating, iteration + 1, options.MaxIterations, objective));
                if (labels.AsSpan().SequenceEqual(previous) || before - objective <= options.Tolerance * before)
                {
                    converged = true;
                    break;
                }
            }

            return new KMeansResult(centroids, k, dimension, objectives.ToArray(), converged, rows, repaired);
        }
    }

    // Uniform sample without replacement, kept in input order (a partial Fisher–Yates over the row numbers).
    private static float[] Sample(ReadOnlySpan<float> vectors, int dimension, int size, Random random)
    {
        int n = vectors.Length / dimension;
        if (n <= size)
        {
            return vectors.ToArray();
        }

        var order = new int[n];
        for (int i = 0; i < n; i++)
        {
            order[i] = i;
        }

        for (int i = 0; i < size; i++)
        {
            int j = random.Next(i, n);
            (order[i], order[j]) = (order[j], order[i]);
        }

        Array.Sort(order, 0, size);
        var sample = new float[(long)size * dimension];
        for (int i = 0; i < size; i++)
        {
            vectors.Slice(order[i] * dimension, dimension).CopyTo(sample.AsSpan(i * dimension, dimension));
        }

        return sample;
    }

    // k-means++: each next centroid is a row drawn with probability proportional to its squared distance to the
    // nearest centroid chosen so far. The distance update per new centroid runs in parallel chunks.
    private static unsafe float[] SeedPlusPlus(KernelPath path, float* data, int rows, int d, int k, Random random, int parallelism, IProgress<KMeansProgress>? progress, CancellationToken cancellationToken)
    {
        var centroids = new float[k * d];
        var nearest = new float[rows];
        nearest.AsSpan().Fill(float.PositiveInfinity);
        int first = random.Next(rows);
        new ReadOnlySpan<float>(data + ((nint)first * d), d).CopyTo(centroids);
        const int Chunk = 4096;
        int chunks = (rows + Chunk - 1) / Chunk;
        var options = new ParallelOptions { MaxDegreeOfParallelism = parallelism, CancellationToken = cancellationToken };
        nint rowsPointer = (nint)data;
        for (int c = 1; c <= k; c++)
        {
            cancellationToken.ThrowIfCancellationRequested();
            int latest = c - 1;
            Parallel.For(0, chunks, options, () => new float[Chunk], (chunk, _, scratch) =>
            {
                int start = chunk * Chunk;
                int count = Math.Min(Chunk, rows - start);
                ref float centroid = ref centroids[latest * d];
                ManyKernel.Compute<SquaredDifferenceStep>(path, ref centroid, ref Unsafe.AsRef<float>((float*)rowsPointer + ((nint)start * d)), d, count, ref MemoryMarshal.GetArrayDataReference(scratch));
                for (int i = 0; i < count; i++)
                {
                    nearest[start + i] = Math.Min(nearest[start + i], scratch[i]);
                }

                return scratch;
            }, static _ => { });

            if (c == k)
            {
                break;
            }

            double total = Sum(nearest);
            int chosen;
            if (total > 0)
            {
                double target = random.NextDouble() * total;
                double running = 0;
                chosen = rows - 1;
                for (int i = 0; i < rows; i++)
                {
                    running += nearest[i];
                    if (running > target)
                    {
                        chosen = i;
                        break;
                    }
                }
            }
            else
            {
                // Every row coincides with a centroid already (duplicates): any row will do.
                chosen = random.Next(rows);
            }

            new ReadOnlySpan<float>(data + ((nint)chosen * d), d).CopyTo(centroids.AsSpan(c * d, d));
            if ((c & 63) == 0)
            {
                progress?.Report(new KMeansProgress(KMeansStage.Seeding, c, k, double.NaN));
            }
        }

        progress?.Report(new KMeansProgress(KMeansStage.Seeding, k, k, double.NaN));
        return centroids;
    }

    // Moves every centroid to the mean of its rows (summed in double, in row order) and re-seeds empty clusters.
    private static unsafe int Update(float* data, int rows, int d, int k, int[] labels, float[] distances, float[] centroids, double[] sums, int[] counts)
    {
        Array.Clear(sums);
        Array.Clear(counts);
        for (int r = 0; r < rows; r++)
        {
            int label = labels[r];
            counts[label]++;
            float* row = data + ((nint)r * d);
            Span<double> sum = sums.AsSpan(label * d, d);
            for (int j = 0; j < d; j++)
            {
                sum[j] += row[j];
            }
        }

        int repaired = 0;
        for (int c = 0; c < k; c++)
        {
            if (counts[c] > 0)
            {
                continue;
            }

            // The row farthest from its centroid, in a cluster that keeps another row, becomes this centroid: its own
            // cost drops to zero and its old cluster's mean over the remaining rows is optimal for them.
            int far = -1;
            for (int r = 0; r < rows; r++)
            {
                if (counts[labels[r]] > 1 && (far < 0 || distances[r] > distances[far]))
                {
                    far = r;
                }
            }

            if (far < 0)
            {
                break;
            }

            int from = labels[far];
            float* row = data + ((nint)far * d);
            Span<double> oldSum = sums.AsSpan(from * d, d);
            Span<double> newSum = sums.AsSpan(c * d, d);
            for (int j = 0; j < d; j++)
            {
                oldSum[j] -= row[j];
                newSum[j] = row[j];
            }

            counts[from]--;
            counts[c] = 1;
            labels[far] = c;
            distances[far] = 0;
            repaired++;
        }

        for (int c = 0; c < k; c++)
        {
            if (counts[c] == 0)
            {
                continue;
            }

            double scale = 1.0 / counts[c];
            Span<double> sum = sums.AsSpan(c * d, d);
            Span<float> centroid = centroids.AsSpan(c * d, d);
            for (int j = 0; j < d; j++)
            {
                centroid[j] = (float)(sum[j] * scale);
            }
        }

        return repaired;
    }

    private static double Sum(ReadOnlySpan<float> values)
    {
        double total = 0;
        foreach (float value in values)
        {
            total += value;
        }

        return total;
    }
}

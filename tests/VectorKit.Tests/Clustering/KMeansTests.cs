using VectorKit.Clustering;
using VectorKit.Tests.Evaluation;
using VectorKit.Tests.TestData;
using Xunit;

namespace VectorKit.Tests.Clustering;

public class KMeansTests
{
    // A seeded Gaussian mixture with known centres: centres uniform in [−10, 10]ᵈ, rows at spread σ around them.
    private static (float[] Data, float[] Centres) Mixture(int clusters, int perCluster, int d, float sigma, int seed)
    {
        var random = new Random(seed);
        var centres = new float[clusters * d];
        for (int i = 0; i < centres.Length; i++)
        {
            centres[i] = (float)((random.NextDouble() * 20) - 10);
        }

        var data = new float[clusters * perCluster * d];
        for (int r = 0; r < clusters * perCluster; r++)
        {
            int c = r % clusters;
            for (int j = 0; j < d; j++)
            {
                double u = 1.0 - random.NextDouble(), v = random.NextDouble();
                double gaussian = Math.Sqrt(-2 * Math.Log(u)) * Math.Cos(2 * Math.PI * v);
                data[(r * d) + j] = centres[(c * d) + j] + (float)(sigma * gaussian);
            }
        }

        return (data, centres);
    }

    [Fact]
    public void GaussianMixture_RecoversTheKnownCentres_WithinTolerance()
    {
        // 12 clusters × 400 rows in 16 dimensions at σ = 0.3. A cluster mean over 400 rows errs by about
        // σ·√(d/400) = 0.06 in norm (standard error of a mean); the tolerance is 0.2, over three times that.
        const int Clusters = 12, PerCluster = 400, D = 16;
        (float[] data, float[] centres) = Mixture(Clusters, PerCluster, D, 0.3f, seed: 5);
        KMeansResult result = KMeans.Train(data, D, new KMeansOptions { ClusterCount = Clusters, MaxIterations = 50 });

        Assert.True(result.Converged);
        var used = new HashSet<int>();
        for (int c = 0; c < Clusters; c++)
        {
            ReadOnlySpan<float> truth = centres.AsSpan(c * D, D);
            int best = -1;
            double bestDistance = double.MaxValue;
            for (int f = 0; f < Clusters; f++)
            {
                double distance = Math.Sqrt(DoubleMath.SquaredEuclidean(truth, result.Centroid(f)));
                if (distance < bestDistance)
                {
                    bestDistance = distance;
                    best = f;
                }
            }

            Assert.True(bestDistance < 0.2, $"centre {c}: nearest recovered centroid is {bestDistance:F3} away");
            Assert.True(used.Add(best), $"centroid {best} matched two true centres");
        }
    }

    [Theory]
    [InlineData(1)]
    [InlineData(2)]
    public void Objective_NeverIncreases_BetweenIterations(int seed)
    {
        // Overlapping clusters and more centroids than clusters, so Lloyd iterations keep moving for a while.
        float[] data = ClusteredData.Generate(3000, 24, 20, 0.6f, seed);
        KMeansResult result = KMeans.Train(data, 24, new KMeansOptions { ClusterCount = 48, MaxIterations = 40, Tolerance = 0, Seed = seed });
        Assert.True(result.Iterations >= 5, $"only {result.Iterations} iterations");
        IReadOnlyList<double> history = result.ObjectiveHistory;
        for (int i = 1; i < history.Count; i++)
        {
            // Distances are float sums: allow relative 1e-6 of rounding (the float32 unit roundoff is 6e-8).
            Assert.True(history[i] <= history[i - 1] * (1 + 1e-6), $"objective rose at iteration {i}: {history[i - 1]} → {history[i]}");
        }

        // The reported objective is the sum of squared distances to the nearest centroid, checked in double.
        double reference = 0;
        for (int r = 0; r < 3000; r++)
        {
            double best = double.MaxValue;
            for (int c = 0; c < 48; c++)
            {
                best = Math.Min(best, DoubleMath.SquaredEuclidean(data.AsSpan(r * 24, 24), result.Centroid(c)));
            }

            reference += best;
        }

        Assert.Equal(reference, result.Objective, reference * 1e-5);
    }

    [Fact]
    public void SameSeed_SameCentroids_WhateverTheThreadCount()
    {
        float[] data = ClusteredData.Generate(5000, 20, 30, 0.3f, seed: 9);
        KMeansResult one = KMeans.Train(data, 20, new KMeansOptions { ClusterCount = 32, MaxDegreeOfParallelism = 1, SampleSize = 3000 });
        KMeansResult two = KMeans.Train(data, 20, new KMeansOptions { ClusterCount = 32, MaxDegreeOfParallelism = 2, SampleSize = 3000 });
        Assert.True(one.Centroids.SequenceEqual(two.Centroids));
        Assert.Equal(3000, one.TrainingRows);
        KMeansResult other = KMeans.Train(data, 20, new KMeansOptions { ClusterCount = 32, Seed = 7, SampleSize = 3000 });
        Assert.False(one.Centroids.SequenceEqual(other.Centroids));
    }

    [Fact]
    public void Assign_MatchesABruteForceDoubleLoop()
    {
        float[] data = ClusteredData.Generate(2000, 33, 10, 0.5f, seed: 3);
        KMeansResult result = KMeans.Train(data, 33, new KMeansOptions { ClusterCount = 17 });
        var labels = new int[2000];
        result.Assign(data, labels);
        int disagreements = 0;
        for (int r = 0; r < 2000; r++)
        {
            float[] row = data.AsSpan(r * 33, 33).ToArray();
            double[] distances = Enumerable.Range(0, 17).Select(c => DoubleMath.SquaredEuclidean(row, result.Centroid(c))).ToArray();
            int best = Array.IndexOf(distances, distances.Min());
            Assert.Equal(labels[r], result.Assign(row));
            if (labels[r] != best)
            {
                // Only a float near-tie may differ from the double reference.
                disagreements++;
                Assert.True(Math.Abs(distances[labels[r]] - distances[best]) <= 1e-5 * distances[best]);
            }
        }

        Assert.True(disagreements <= 2);
    }

    [Fact]
    public void EmptyCluster_IsRepaired_AndTrainingStillEndsAtTheOptimum()
    {
        // 200 copies of one point and 3 others, 6 clusters: k-means++ must pick duplicate centroids, which get no rows
        // (ties go to the lower number), so every iteration has empty clusters to repair.
        const int D = 4;
        var data = new List<float>();
        for (int i = 0; i < 200; i++)
        {
            data.AddRange([1, 1, 1, 1]);
        }

        data.AddRange([5, 5, 5, 5, 9, 9, 9, 9, -3, -3, -3, -3]);
        KMeansResult result = KMeans.Train(data.ToArray(), D, new KMeansOptions { ClusterCount = 6, MaxIterations = 10 });
        Assert.True(result.RepairedClusters >= 1);
        var labels = new int[203];
        result.Assign(data.ToArray(), labels);
        Assert.Equal(4, labels.Distinct().Count());
        Assert.Equal(0, result.Objective);
        Assert.True(result.Converged);
    }

    [Fact]
    public void FewerRowsThanClusters_NamesTheMinimum()
    {
        var e = Assert.Throws<ArgumentException>(() => KMeans.Train(new float[10 * 3], 3, new KMeansOptions { ClusterCount = 16 }));
        Assert.Contains("has 10 rows; k-means with 16 clusters needs at least 16 training rows", e.Message);
    }

    [Fact]
    public void NaNOrInfinity_InTrainingData_NamesRowAndComponent()
    {
        float[] data = ClusteredData.Generate(100, 5, 3, 0.5f, seed: 1);
        data[(42 * 5) + 3] = float.NaN;
        var e = Assert.Throws<ArgumentException>(() => KMeans.Train(data, 5, new KMeansOptions { ClusterCount = 4 }));
        Assert.Contains("row 42", e.Message);
        Assert.Contains("[3] = NaN", e.Message);
        data[(42 * 5) + 3] = float.NegativeInfinity;
        Assert.Contains("row 42", Assert.Throws<ArgumentException>(() => KMeans.Train(data, 5, new KMeansOptions { ClusterCount = 4 })).Message);
    }

    [Fact]
    public void BadShapeAndOptions_AreRejected()
    {
        Assert.Contains("not a multiple of the dimension 3", Assert.Throws<ArgumentException>(() => KMeans.Train(new float[10], 3)).Message);
        Assert.Contains("dimension must be positive", Assert.Throws<ArgumentOutOfRangeException>(() => KMeans.Train(new float[10], 0)).Message);
        Assert.Contains("ClusterCount must be in [1, 1048576]; got 0", Assert.Throws<ArgumentOutOfRangeException>(() => new KMeansOptions { ClusterCount = 0 }).Message);
        Assert.Contains("MaxIterations must be in [0, 10000]", Assert.Throws<ArgumentOutOfRangeException>(() => new KMeansOptions { MaxIterations = -1 }).Message);
        Assert.Contains("SampleSize must be positive", Assert.Throws<ArgumentOutOfRangeException>(() => new KMeansOptions { SampleSize = 0 }).Message);
        Assert.Contains("Tolerance must be a finite number", Assert.Throws<ArgumentOutOfRangeException>(() => new KMeansOptions { Tolerance = double.NaN }).Message);
        Assert.Contains("MaxDegreeOfParallelism", Assert.Throws<ArgumentOutOfRangeException>(() => new KMeansOptions { MaxDegreeOfParallelism = 0 }).Message);
        KMeansResult result = KMeans.Train(new float[] { 0, 0, 1, 1 }, 2, new KMeansOptions { ClusterCount = 2 });
        Assert.Throws<ArgumentOutOfRangeException>(() => result.Centroid(2));
        Assert.Throws<ArgumentException>(() => result.Assign([1f, 2f, 3f]));
        Assert.Throws<ArgumentException>(() => result.Assign(new float[4], new int[3]));
    }

    [Fact]
    public void Progress_IsReported_AndCancellationStopsTraining()
    {
        float[] data = ClusteredData.Generate(4000, 16, 20, 0.4f, seed: 2);
        var progress = new SynchronousProgress<KMeansProgress>();
        KMeans.Train(data, 16, new KMeansOptions { ClusterCount = 128, MaxIterations = 3, Tolerance = 0 }, progress);
        IReadOnlyList<KMeansProgress> reports = progress.Values;
        Assert.Contains(reports, r => r.Stage == KMeansStage.Seeding && r.Completed == 128);
        Assert.Contains(reports, r => r.Stage == KMeansStage.Iterating && r.Completed == 1 && r.Objective > 0);

        using var cancelled = new CancellationTokenSource();
        cancelled.Cancel();
        Assert.ThrowsAny<OperationCanceledException>(() => KMeans.Train(data, 16, new KMeansOptions { ClusterCount = 8 }, null, cancelled.Token));
    }
}

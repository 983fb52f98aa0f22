using VectorKit.Distance.Kernels;
using VectorKit.Internal;

namespace VectorKit.Clustering;

/// <summary>The centroids k-means found, and how the training went.</summary>
/// <remarks>Immutable and thread-safe.</remarks>
public sealed class KMeansResult
{
    private readonly float[] _centroids;
    private readonly double[] _objectives;

    internal KMeansResult(float[] centroids, int clusterCount, int dimension, double[] objectives, bool converged, int trainingRows, int repairedClusters)
    {
        _centroids = centroids;
        _objectives = objectives;
        ClusterCount = clusterCount;
        Dimension = dimension;
        Converged = converged;
        TrainingRows = trainingRows;
        RepairedClusters = repairedClusters;
    }

    /// <summary>The number of centroids.</summary>
    public int ClusterCount { get; }

    /// <summary>Components per centroid.</summary>
    public int Dimension { get; }

    /// <summary>The centroids, row after row: <c>ClusterCount × Dimension</c> floats.</summary>
    public ReadOnlySpan<float> Centroids => _centroids;

    /// <summary>
    /// The objective (sum over the training rows of the squared distance to the nearest centroid) after each assignment:
    /// entry 0 is for the seeded centroids, entry i after i Lloyd iterations. It never increases, apart from float
    /// rounding of the distances (relative 10⁻⁶ or so).
    /// </summary>
    public IReadOnlyList<double> ObjectiveHistory => _objectives;

    /// <summary>The final objective: the last entry of <see cref="ObjectiveHistory"/>.</summary>
    public double Objective => _objectives[^1];

    /// <summary>Lloyd iterations run (the centroid moves), at most <see cref="KMeansOptions.MaxIterations"/>.</summary>
    public int Iterations => _objectives.Length - 1;

    /// <summary>
    /// Whether training stopped because it converged (an iteration lowered the objective by less than
    /// <see cref="KMeansOptions.Tolerance"/> relative, or no row changed cluster) rather than at the iteration limit.
    /// </summary>
    public bool Converged { get; }

    /// <summary>The number of rows training used (the sample size).</summary>
    public int TrainingRows { get; }

    /// <summary>Times a cluster went empty and was re-seeded with the row farthest from its centroid.</summary>
    public int RepairedClusters { get; }

    /// <summary>A copy of one centroid.</summary>
    /// <param name="cluster">The centroid number, in [0, <see cref="ClusterCount"/>).</param>
    /// <returns>A span over the centroid's components.</returns>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="cluster"/> is out of range.</exception>
    public ReadOnlySpan<float> Centroid(int cluster)
    {
        if ((uint)cluster >= (uint)ClusterCount)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(cluster), cluster, $"must be in [0, {ClusterCount})");
        }

        return _centroids.AsSpan(cluster * Dimension, Dimension);
    }

    /// <summary>The nearest centroid (squared Euclidean) of one vector; ties go to the lower number.</summary>
    /// <param name="vector">Exactly <see cref="Dimension"/> finite components.</param>
    /// <returns>The centroid number.</returns>
    /// <exception cref="ArgumentException">The vector has the wrong length or a non-finite component.</exception>
    public int Assign(ReadOnlySpan<float> vector)
    {
        Internal.VectorChecks.CheckVector(vector, Dimension, nameof(vector));
        return NearestCentroid.One(KernelDispatch.Widest, vector, _centroids, ClusterCount, out _);
    }

    /// <summary>The nearest centroid of many vectors, in parallel.</summary>
    /// <param name="vectors">Row after row, a multiple of <see cref="Dimension"/> finite components.</param>
    /// <param name="clusters">Receives one centroid number per row.</param>
    /// <param name="cancellationToken">Stops the work between blocks of rows.</param>
    /// <exception cref="ArgumentException">The lengths disagree, or a component is not finite.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public unsafe void Assign(ReadOnlySpan<float> vectors, Span<int> clusters, CancellationToken cancellationToken = default)
    {
        int d = Dimension;
        if (vectors.Length % d != 0 || vectors.Length / d != clusters.Length)
        {
            ThrowHelper.ThrowArgument(nameof(clusters), $"vectors holds {vectors.Length} components and clusters {clusters.Length} slots; dimension {d} needs {vectors.Length / d} slots and a multiple of {d} components.");
        }

        Internal.VectorChecks.CheckFinite(vectors, nameof(vectors), 0, d);
        var distances = new float[clusters.Length];
        fixed (float* rows = vectors)
        {
            NearestCentroid.Assign(KernelDispatch.Widest, rows, clusters.Length, _centroids, ClusterCount, d, clusters, distances, Environment.ProcessorCount, cancellationToken);
        }
    }

    /// <summary>The centroid array itself, for the indexes built on it (never exposed).</summary>
    internal float[] CentroidArray => _centroids;
}

namespace VectorKit.Clustering;

/// <summary>What k-means training is doing.</summary>
public enum KMeansStage
{
    /// <summary>Choosing the initial centroids (k-means++); <see cref="KMeansProgress.Completed"/> counts centroids chosen.</summary>
    Seeding = 0,

    /// <summary>Lloyd iterations; <see cref="KMeansProgress.Completed"/> counts iterations finished.</summary>
    Iterating = 1,
}

/// <summary>A progress report from k-means training.</summary>
/// <param name="Stage">Seeding or iterating.</param>
/// <param name="Completed">Centroids chosen, or iterations finished.</param>
/// <param name="Total">The number of centroids, or the most iterations.</param>
/// <param name="Objective">While iterating, the sum of squared distances of the training rows to their nearest centroid after the last assignment; otherwise NaN.</param>
public readonly record struct KMeansProgress(KMeansStage Stage, int Completed, int Total, double Objective);

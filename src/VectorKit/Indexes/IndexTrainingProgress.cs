namespace VectorKit.Indexes;

/// <summary>What an index's training is doing.</summary>
public enum IndexTrainingStage
{
    /// <summary>Seeding the list centroids (k-means++); <see cref="IndexTrainingProgress.Completed"/> counts centroids chosen.</summary>
    SeedingCentroids = 0,

    /// <summary>k-means iterations for the list centroids; <see cref="IndexTrainingProgress.Completed"/> counts iterations.</summary>
    RefiningCentroids = 1,

    /// <summary>Training the quantizer of the stored codes; <see cref="IndexTrainingProgress.Completed"/> counts product-quantizer sub-spaces trained (1 of 1 for scalar ranges).</summary>
    TrainingQuantizer = 2,
}

/// <summary>A progress report from <see cref="ITrainableIndex.Train"/>.</summary>
/// <param name="Stage">The current stage.</param>
/// <param name="Completed">Work done in this stage.</param>
/// <param name="Total">Work in this stage (for iterations, the most that may run).</param>
public readonly record struct IndexTrainingProgress(IndexTrainingStage Stage, int Completed, int Total);

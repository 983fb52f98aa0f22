namespace VectorKit.IO;

/// <summary>Which rows of a data file a <see cref="StreamingBuild"/> trains an index on.</summary>
public enum TrainingRowPick
{
    /// <summary>Evenly spaced rows: row ⌊i · rows / n⌋ for i = 0 … n − 1, so a file sorted by category still trains on every part of it.</summary>
    Strided = 0,

    /// <summary>n distinct rows drawn uniformly at random with <see cref="StreamingBuildOptions.Seed"/>, read in file order.</summary>
    Random = 1,
}

namespace VectorKit.IO;

/// <summary>Progress of a <see cref="StreamingBuild"/>: within one stage, <see cref="Completed"/> never decreases.</summary>
/// <param name="Stage">The stage running.</param>
/// <param name="Completed">Work done in the stage (rows, or 0/1 for training).</param>
/// <param name="Total">Work in the stage when it is done.</param>
public readonly record struct StreamingBuildProgress(StreamingBuildStage Stage, long Completed, long Total);

namespace VectorKit.Tuning;

/// <summary>Progress of a tuning: the phase, and the settings measured so far.</summary>
/// <param name="Stage">The running phase.</param>
/// <param name="Completed">Settings measured so far (0 while the ground truth is computed).</param>
/// <param name="Latest">The setting measured last, or <see langword="null"/>.</param>
public readonly record struct TuningProgress(TuningStage Stage, int Completed, TuningPoint? Latest);

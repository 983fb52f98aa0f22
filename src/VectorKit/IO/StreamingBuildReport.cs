namespace VectorKit.IO;

/// <summary>What a <see cref="StreamingBuild"/> did.</summary>
/// <param name="RowsAdded">Rows added to the index; row r has id r.</param>
/// <param name="TrainingRows">Rows the index was trained on; 0 when it was already trained.</param>
/// <param name="PeakRowsBuffered">
/// The most float32 rows the build held in its own buffers at one time (sample and block together), counted at each
/// allocation and release; at most <see cref="StreamingBuildOptions.SampleSize"/> + <see cref="StreamingBuildOptions.BlockRows"/>.
/// </param>
/// <param name="LargestBlockRead">The most rows one read of the file returned; at most <see cref="StreamingBuildOptions.BlockRows"/>.</param>
/// <param name="Elapsed">Wall time of the whole build.</param>
public sealed record StreamingBuildReport(long RowsAdded, int TrainingRows, long PeakRowsBuffered, int LargestBlockRead, TimeSpan Elapsed);

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="InvertedFileFastScanRescoredContract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedInvertedFileFastScanRescoredContract : MappedContract<InvertedFileFastScanRescoredContract>;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="InvertedFileProductRescoredContract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedInvertedFileProductRescoredContract : MappedContract<InvertedFileProductRescoredContract>;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The contract of a <see cref="VectorKit.Persistence.SegmentedIndex"/> over a mapped <see cref="InvertedFileProductRescoredContract"/> base.</summary>
public sealed class SegmentedInvertedFileProductRescoredContract : SegmentedContract<InvertedFileProductRescoredContract>;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="ExactScalarRescoredContract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedExactScalarRescoredContract : MappedContract<ExactScalarRescoredContract>;

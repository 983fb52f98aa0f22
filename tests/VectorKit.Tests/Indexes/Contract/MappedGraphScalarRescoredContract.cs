namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="GraphScalarRescoredContract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedGraphScalarRescoredContract : MappedContract<GraphScalarRescoredContract>;

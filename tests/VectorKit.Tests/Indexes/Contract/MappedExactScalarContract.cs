namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="ExactScalarContract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedExactScalarContract : MappedContract<ExactScalarContract>;

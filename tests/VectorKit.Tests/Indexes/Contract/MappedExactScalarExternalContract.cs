namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="ExactScalarExternalContract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedExactScalarExternalContract : MappedContract<ExactScalarExternalContract>;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="GraphScalarExternalContract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedGraphScalarExternalContract : MappedContract<GraphScalarExternalContract>;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="GraphScalarContract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedGraphScalarContract : MappedContract<GraphScalarContract>;

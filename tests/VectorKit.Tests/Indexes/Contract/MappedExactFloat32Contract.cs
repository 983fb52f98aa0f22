namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="ExactFloat32Contract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedExactFloat32Contract : MappedContract<ExactFloat32Contract>;

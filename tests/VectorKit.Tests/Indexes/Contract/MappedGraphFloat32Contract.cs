namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="GraphFloat32Contract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedGraphFloat32Contract : MappedContract<GraphFloat32Contract>;

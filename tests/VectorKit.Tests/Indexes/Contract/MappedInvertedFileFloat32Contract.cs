namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="InvertedFileFloat32Contract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedInvertedFileFloat32Contract : MappedContract<InvertedFileFloat32Contract>;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="InvertedFileScalarContract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedInvertedFileScalarContract : MappedContract<InvertedFileScalarContract>;

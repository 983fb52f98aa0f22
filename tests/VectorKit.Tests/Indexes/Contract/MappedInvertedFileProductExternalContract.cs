namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The read-only contract of <see cref="InvertedFileProductExternalContract"/>, on its index saved and opened mapped.</summary>
public sealed class MappedInvertedFileProductExternalContract : MappedContract<InvertedFileProductExternalContract>;

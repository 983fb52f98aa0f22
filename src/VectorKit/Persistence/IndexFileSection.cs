namespace VectorKit.Persistence;

/// <summary>One bulk section of a saved index file, as its header lists it.</summary>
/// <param name="Id">The section's number in the file format (stable across versions).</param>
/// <param name="Name">The section's name (for example <c>Ids</c>, <c>Vectors</c>, <c>BottomLinks</c>), or <c>section N</c> for a number this library does not know.</param>
/// <param name="PayloadBytes">The payload's length in bytes, without its frame, padding and checksum.</param>
public sealed record IndexFileSection(int Id, string Name, long PayloadBytes);

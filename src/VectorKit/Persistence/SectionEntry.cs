namespace VectorKit.Persistence;

/// <summary>One section as the header lists it: its id, flags and payload length in bytes.</summary>
internal readonly record struct SectionEntry(uint Id, uint Flags, long Length);

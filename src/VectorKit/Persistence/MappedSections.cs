using System.Buffers.Binary;
using System.IO.Hashing;

namespace VectorKit.Persistence;

/// <summary>
/// Where each section's payload lies in a mapped file, found from the header alone and checked against the file:
/// every offset is computed with checked arithmetic from the header's lengths (none is read from the file), every
/// frame must repeat its header entry, padding must be zero, and the last section must end where the file ends.
/// Payload checksums are verified only on request (<see cref="VerifyChecksum"/>), since that reads the whole payload.
/// </summary>
internal sealed unsafe class MappedSections
{
    // Checksums over payloads longer than a span are appended in blocks of this size.
    private const int BlockBytes = 1 << 20;

    private readonly MappedFileView _view;
    private readonly List<(SectionEntry Entry, long Offset)> _payloads = [];

    public MappedSections(MappedFileView view, IndexHeader header, long headerEnd)
    {
        _view = view;
        long at = headerEnd;
        foreach (SectionEntry entry in header.Sections)
        {
            string name = FileLayout.SectionName(entry.Id);
            string key = FileLayout.SectionKey(entry.Id);

            // The reader has checked the declared total against the file's length, so the frame lies inside it.
            var frame = new ReadOnlySpan<byte>(view.Start + at, FileLayout.SectionFrameBytes);
            uint id = BinaryPrimitives.ReadUInt32LittleEndian(frame);
            uint flags = BinaryPrimitives.ReadUInt32LittleEndian(frame[4..]);
            long length = BinaryPrimitives.ReadInt64LittleEndian(frame[8..]);
            if (id != entry.Id || flags != entry.Flags || length != entry.Length)
            {
                throw new IndexFileException(
                    $"Index file section frame at byte {at} says id {id}, flags {flags}, length {length}; the header lists {name} with flags {entry.Flags}, length {entry.Length}.",
                    key,
                    at);
            }

            at = checked(at + FileLayout.SectionFrameBytes);
            int padding = FileLayout.PaddingAfter(at);
            int nonZero = new ReadOnlySpan<byte>(view.Start + at, padding).IndexOfAnyExcept((byte)0);
            if (nonZero >= 0)
            {
                throw new IndexFileException($"Index file section {name}: padding byte {at + nonZero} is {view.Start[at + nonZero]:X2}; padding must be zero.", key, at + nonZero);
            }

            at = checked(at + padding);
            _payloads.Add((entry, at));
            at = checked(at + entry.Length + FileLayout.ChecksumBytes);
        }

        if (at != view.Length)
        {
            throw new IndexFileException($"Index file has {view.Length - at} unexpected bytes after its last section (which ends at byte {at}).", "end", at);
        }
    }

    /// <summary>The sections in file order.</summary>
    public IReadOnlyList<(SectionEntry Entry, long Offset)> Payloads => _payloads;

    /// <summary>The payload of the section at <paramref name="position"/> in the list: first byte and length.</summary>
    public (IntPtr Start, long Length) Payload(int position)
    {
        (SectionEntry entry, long offset) = _payloads[position];
        return ((IntPtr)(_view.Start + offset), entry.Length);
    }

    /// <summary>Hashes the payload at <paramref name="position"/> and compares it with the stored checksum.</summary>
    public void VerifyChecksum(int position, CancellationToken cancellationToken)
    {
        (SectionEntry entry, long offset) = _payloads[position];
        var hash = new XxHash3();
        for (long done = 0; done < entry.Length; done += BlockBytes)
        {
            cancellationToken.ThrowIfCancellationRequested();
            hash.Append(new ReadOnlySpan<byte>(_view.Start + offset + done, (int)Math.Min(BlockBytes, entry.Length - done)));
        }

        ulong stored = BinaryPrimitives.ReadUInt64LittleEndian(new ReadOnlySpan<byte>(_view.Start + offset + entry.Length, FileLayout.ChecksumBytes));
        ulong computed = hash.GetCurrentHashAsUInt64();
        if (stored != computed)
        {
            throw new IndexFileException(
                $"Index file section {FileLayout.SectionName(entry.Id)} is damaged: the checksum of its {entry.Length} payload bytes (from byte {offset}) is {computed:X16}, the stored one {stored:X16}.",
                FileLayout.SectionKey(entry.Id),
                offset);
        }
    }

    /// <summary>
    /// Matches the file's sections against what a kind expects, in order, with the same lengths (unknown skippable
    /// sections passed over), then at most one <see cref="SectionId.IdOrder"/> of <paramref name="idOrderBytes"/>
    /// (format version 3 for the exact index, 4 for the inverted file; absent in older files); an expected length below
    /// zero is checked by the caller. Returns each section's
    /// position in <see cref="Payloads"/>. With <paramref name="verify"/> every matched payload's checksum is checked.
    /// </summary>
    public Dictionary<SectionId, int> Match(IReadOnlyList<(SectionId Id, long Bytes)> expected, long idOrderBytes, bool verify, CancellationToken cancellationToken)
    {
        var at = new Dictionary<SectionId, int>();
        int next = 0;
        for (int position = 0; position < _payloads.Count; position++)
        {
            SectionEntry entry = _payloads[position].Entry;
            bool known = Enum.IsDefined(typeof(SectionId), entry.Id);
            if (!known && (entry.Flags & FileLayout.SkippableFlag) != 0)
            {
                continue;
            }

            (SectionId id, long bytes) = next < expected.Count ? expected[next] : (SectionId.IdOrder, idOrderBytes);
            if (entry.Id != (uint)id || (next == expected.Count && at.ContainsKey(SectionId.IdOrder)))
            {
                throw IndexHeader.Malformed(next <= expected.Count && !at.ContainsKey(SectionId.IdOrder)
                    ? $"section {position} is {FileLayout.SectionName(entry.Id)}; this index kind expects {FileLayout.SectionName((uint)id)} there"
                    : $"section {FileLayout.SectionName(entry.Id)} is listed but this index kind does not use it");
            }

            // A negative length stands for one the caller checks itself (it depends on a small section read later).
            if (bytes >= 0 && entry.Length != bytes)
            {
                throw Problem(position, $"its length is {entry.Length} bytes; the header's counts require {bytes}");
            }

            at[id] = position;
            next++;
        }

        if (next < expected.Count)
        {
            throw IndexHeader.Malformed($"the section {FileLayout.SectionName((uint)expected[next].Id)} is missing from the section list");
        }

        if (verify)
        {
            foreach (int position in at.Values)
            {
                VerifyChecksum(position, cancellationToken);
            }
        }

        return at;
    }

    /// <summary>
    /// The id lookup of every mapped kind: binary search over the file's <see cref="SectionId.IdOrder"/> (rows of
    /// <paramref name="ids"/> by ascending id, each row number range-checked on use, the whole order verified with
    /// <paramref name="verify"/>), or, for a file without one, a table built from the mapped ids (the one part of
    /// such a file's opening that grows with the count).
    /// </summary>
    public Internal.IdMap IdMap(Dictionary<SectionId, int> at, long* ids, int n, bool verify)
        => IdMap(at, ids, n, n, null, verify);

    /// <summary>
    /// As <see cref="IdMap(Dictionary{SectionId, int}, long*, int, bool)"/> for <paramref name="rows"/> rows of which
    /// those flagged in <paramref name="removed"/> are not live: the order lists the <paramref name="live"/> others.
    /// </summary>
    public Internal.IdMap IdMap(Dictionary<SectionId, int> at, long* ids, int live, int rows, byte* removed, bool verify)
    {
        int n = rows;
        if (at.TryGetValue(SectionId.IdOrder, out int position))
        {
            var lookup = new Internal.SortedIdLookup(ids, (int*)Payload(position).Start, live, rows, removed);
            if (verify)
            {
                try
                {
                    lookup.Verify();
                }
                catch (InvalidDataException e)
                {
                    throw Problem(position, e.Message);
                }
            }

            return new Internal.IdMap(lookup);
        }

        var map = new Internal.IdMap(live);
        for (int slot = 0; slot < n; slot++)
        {
            if (removed != null && removed[slot] != 0)
            {
                continue;
            }

            if (!map.TryAdd(ids[slot], slot))
            {
                throw Problem(at[SectionId.Ids], $"id {ids[slot]} appears at rows {map[ids[slot]]} and {slot}; ids must be unique");
            }
        }

        return map;
    }

    /// <summary>
    /// Adds the sections of 8-bit codes over whole vectors (ranges, then <paramref name="rows"/> codes) when
    /// <paramref name="codes"/>, and then the full vectors when <paramref name="keepsFull"/>: the tail shared by the
    /// exact index and the graph.
    /// </summary>
    public static void ExpectRows(List<(SectionId Id, long Bytes)> expected, int dimension, int rows, bool codes, bool trained, bool keepsFull)
    {
        if (codes)
        {
            expected.Add((SectionId.ScalarRanges, trained ? 2L * dimension * sizeof(float) : 0));
            expected.Add((SectionId.ScalarCodes, checked((long)rows * Quantization.ScalarQuantizer.PaddedLength(dimension))));
        }

        if (keepsFull)
        {
            expected.Add((SectionId.Vectors, checked((long)rows * dimension * sizeof(float))));
        }
    }

    /// <summary>
    /// The trained 8-bit ranges (<paramref name="dimension"/> minimums, then steps), copied after their checksum (they
    /// are small, and the quantizer derives its padded ranges from them) and checked finite.
    /// </summary>
    public float[] ScalarRanges(Dictionary<SectionId, int> at, int dimension, CancellationToken cancellationToken)
    {
        int position = at[SectionId.ScalarRanges];
        float[] ranges = CopySmall<float>(position, 2 * dimension, cancellationToken);
        if (FiniteCheck.IndexOfNonFinite(ranges) >= 0)
        {
            throw Problem(position, "it holds a non-finite range value");
        }

        return ranges;
    }

    /// <summary>The small section at <paramref name="position"/> copied out after its checksum (always verified: it is small); <paramref name="count"/> values.</summary>
    public T[] CopySmall<T>(int position, int count, CancellationToken cancellationToken)
        where T : unmanaged
    {
        VerifyChecksum(position, cancellationToken);
        return new ReadOnlySpan<T>((void*)Payload(position).Start, count).ToArray();
    }

    /// <summary>Checks that the float32 rows of the section at <paramref name="position"/> (<paramref name="n"/> × <paramref name="d"/>) are finite, in 1 MiB blocks.</summary>
    public void CheckFiniteRows(int position, int d, int n, CancellationToken cancellationToken)
    {
        float* rows = (float*)Payload(position).Start;
        int blockRows = Math.Max(1, BlockBytes / (d * sizeof(float)));
        for (int start = 0; start < n; start += blockRows)
        {
            cancellationToken.ThrowIfCancellationRequested();
            int count = Math.Min(blockRows, n - start);
            var block = new ReadOnlySpan<float>(rows + ((long)start * d), count * d);
            int bad = FiniteCheck.IndexOfNonFinite(block);
            if (bad >= 0)
            {
                long element = ((long)start * d) + bad;
                throw Problem(position, $"it holds a non-finite vector component at row {element / d}, component {element % d}; stored vectors must be finite");
            }
        }
    }

    /// <summary>An error about the section at <paramref name="position"/>, placed at its payload.</summary>
    public IndexFileException Problem(int position, string problem)
    {
        (SectionEntry entry, long offset) = _payloads[position];
        return new IndexFileException($"Index file section {FileLayout.SectionName(entry.Id)} (payload from byte {offset}) is invalid: {problem}.", FileLayout.SectionKey(entry.Id), offset);
    }
}

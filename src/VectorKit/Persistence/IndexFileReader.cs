using System.Buffers.Binary;
using System.IO.Hashing;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Indexes;
using VectorKit.Internal;

namespace VectorKit.Persistence;

/// <summary>
/// Reads and verifies the index file layout written by <see cref="IndexFileWriter"/>. Every size is checked against
/// the caps and, when the stream's length is known, against the bytes that remain before anything is allocated; on a
/// stream of unknown length, buffers grow only as data arrives. Offsets in messages count from the start of the index data.
/// </summary>
internal sealed class IndexFileReader
{
    private const int BlockBytes = 1 << 20;

    // Arrays on a stream of unknown length start at this many bytes and double as data arrives.
    private const int FirstGrowthBytes = 64 << 10;

    private readonly Stream _stream;
    private readonly CancellationToken _cancellationToken;
    private readonly XxHash3 _hash = new();
    private readonly long _available;
    private IndexHeader? _header;
    private int _nextSection;
    private SectionEntry _open;
    private bool _inSection;
    private long _sectionRead;
    private long _sectionStart;
    private long _position;

    // The length the header declares for the whole index (0 until the header is read), for truncation messages.
    private long _declaredEnd;

    public IndexFileReader(Stream stream, IndexLoadOptions options, CancellationToken cancellationToken)
    {
        _stream = stream;
        Options = options;
        _cancellationToken = cancellationToken;
        _available = stream.CanSeek ? Math.Max(0, stream.Length - stream.Position) : -1;
    }

    public IndexLoadOptions Options { get; }

    /// <summary>Whether the total length is known (a seekable stream): sizes are then checked against it up front.</summary>
    public bool LengthKnown => _available >= 0;

    /// <summary>Bytes the stream had left when reading started; -1 when unknown.</summary>
    public long Available => _available;

    public long Position => _position;

    /// <summary>The format version from the preamble (0 until the header is read).</summary>
    public int FormatVersion { get; private set; }

    /// <summary>The name and id of the open section, for messages.</summary>
    public string SectionName => _inSection ? FileLayout.SectionName(_open.Id) : "header";

    /// <summary>The name of the open section (or the last one read), for <see cref="IndexFileException.Section"/>.</summary>
    public string SectionKey => _inSection || _nextSection > 0 ? FileLayout.SectionKey(_open.Id) : "header";

    public IndexHeader ReadHeader()
    {
        Span<byte> preamble = stackalloc byte[FileLayout.PreambleBytes];
        int got = ReadUpTo(preamble);
        if (got is > 0 and < 8 && preamble[..got].SequenceEqual(FileLayout.Magic[..got]))
        {
            throw new IndexFileException(
                $"Index file is truncated: it has only {got} bytes, the start of the 8-byte magic number; a whole index file has at least {FileLayout.PreambleBytes + FileLayout.ChecksumBytes + 1}.",
                "header",
                0);
        }

        if (got < 8 || !preamble[..8].SequenceEqual(FileLayout.Magic))
        {
            throw new IndexFileException(
                got < 8
                    ? $"Index file not recognised: it has {got} bytes, fewer than the 8-byte magic number."
                    : $"Index file not recognised: the first 8 bytes are {Convert.ToHexString(preamble[..8])}; an index file starts with {Convert.ToHexString(FileLayout.Magic)}.",
                "header",
                0);
        }

        if (got < FileLayout.PreambleBytes)
        {
            throw Truncated("header", "header", 0, FileLayout.PreambleBytes, got);
        }

        uint version = BinaryPrimitives.ReadUInt32LittleEndian(preamble[8..]);
        if (version == 0 || version > FileLayout.CurrentVersion)
        {
            throw new IndexFileException(
                $"Index file format version {version} is not supported: this library reads versions 1 to {FileLayout.CurrentVersion}"
                + (version > FileLayout.CurrentVersion ? "; the file was written by a newer library." : "."),
                "header",
                8);
        }

        FormatVersion = (int)version;
        int headerLength = BinaryPrimitives.ReadInt32LittleEndian(preamble[12..]);
        if (headerLength < 1 || headerLength > Options.MaxHeaderBytes)
        {
            throw new IndexFileException(
                $"Index file header length is {headerLength} bytes; expected 1 to {Options.MaxHeaderBytes} (the load options' {nameof(IndexLoadOptions.MaxHeaderBytes)}).",
                "header",
                12);
        }

        CheckAvailable("header", 0, (long)FileLayout.PreambleBytes + headerLength + FileLayout.ChecksumBytes);
        byte[] head = new byte[FileLayout.PreambleBytes + headerLength + FileLayout.ChecksumBytes];
        preamble.CopyTo(head);
        ReadExactly(head.AsSpan(FileLayout.PreambleBytes), "header", "header");
        ulong stored = BinaryPrimitives.ReadUInt64LittleEndian(head.AsSpan(FileLayout.PreambleBytes + headerLength));
        ulong computed = XxHash3.HashToUInt64(head.AsSpan(0, FileLayout.PreambleBytes + headerLength));
        if (stored != computed)
        {
            throw new IndexFileException(
                $"Index file header is damaged: its checksum (bytes 0 to {FileLayout.PreambleBytes + headerLength}) is {computed:X16}, the stored one {stored:X16}.",
                "header",
                FileLayout.PreambleBytes + headerLength);
        }

        IndexHeader header = IndexHeader.Decode(head.AsMemory(FileLayout.PreambleBytes, headerLength));
        header.FormatVersion = version;
        CheckCommon(header);
        _header = header;
        return header;
    }

    /// <summary>Opens the next section, which must be <paramref name="id"/> (skippable unknown sections before it are skipped); returns its length.</summary>
    public long OpenSection(SectionId id)
    {
        IndexHeader header = _header!;
        while (true)
        {
            if (_nextSection >= header.Sections.Count)
            {
                throw IndexHeader.Malformed($"the section {FileLayout.SectionName((uint)id)} is missing from the section list");
            }

            SectionEntry entry = header.Sections[_nextSection];
            if (entry.Id != (uint)id && (entry.Flags & FileLayout.SkippableFlag) != 0 && !Enum.IsDefined(typeof(SectionId), entry.Id))
            {
                OpenFrame(entry);
                SkipPayload();
                CloseSection();
                continue;
            }

            if (entry.Id != (uint)id)
            {
                throw IndexHeader.Malformed($"section {_nextSection} is {FileLayout.SectionName(entry.Id)}; this index kind expects {FileLayout.SectionName((uint)id)} there");
            }

            OpenFrame(entry);
            return entry.Length;
        }
    }

    /// <summary>Reads payload bytes of the open section into <paramref name="destination"/>, hashing them block by block.</summary>
    public void Read(Span<byte> destination)
    {
        CheckRoom(destination.Length);
        while (!destination.IsEmpty)
        {
            _cancellationToken.ThrowIfCancellationRequested();
            Span<byte> block = destination[..Math.Min(destination.Length, BlockBytes)];
            ReadExactly(block, SectionName, SectionKey);
            _hash.Append(block);
            _sectionRead += block.Length;
            destination = destination[block.Length..];
        }
    }

    /// <summary>
    /// Reads <paramref name="length"/> payload bytes into pinned or native memory as a two-stage pipeline: while this
    /// thread reads block i + 1 from the stream, a worker hashes block i and runs <paramref name="check"/> on it (with
    /// the block's offset from <paramref name="destination"/>), so the checks cost little beyond the read itself.
    /// Blocks are handed over in order, so the hash sees the bytes in file order.
    /// </summary>
    public unsafe void ReadPipelined(byte* destination, long length, Action<long, int>? check, int blockBytes = BlockBytes)
    {
        CheckRoom(length);
        if (length <= 2L * blockBytes)
        {
            Read(new Span<byte>(destination, (int)length));
            check?.Invoke(0, (int)length);
            return;
        }

        Task? pending = null;
        try
        {
            for (long at = 0; at < length; at += blockBytes)
            {
                _cancellationToken.ThrowIfCancellationRequested();
                int n = (int)Math.Min(blockBytes, length - at);
                ReadExactly(new Span<byte>(destination + at, n), SectionName, SectionKey);
                pending?.GetAwaiter().GetResult();
                byte* block = destination + at;
                long offset = at;
                pending = Task.Run(() =>
                {
                    _hash.Append(new ReadOnlySpan<byte>(block, n));
                    check?.Invoke(offset, n);
                });
                _sectionRead += n;
            }

            pending?.GetAwaiter().GetResult();
            pending = null;
        }
        finally
        {
            // On failure, the worker must be done with the memory before the caller frees it.
            if (pending is not null)
            {
                ((IAsyncResult)pending).AsyncWaitHandle.WaitOne();
            }
        }
    }

    public void Read<T>(Span<T> destination)
        where T : unmanaged
        => Read(MemoryMarshal.AsBytes(destination));

    /// <summary>
    /// Reads <paramref name="count"/> elements, the whole payload of the open section. With a known stream length the
    /// array is allocated at once (the length was checked); otherwise it starts small and doubles as data arrives.
    /// </summary>
    public unsafe T[] ReadArray<T>(int count)
        where T : unmanaged
    {
        ExpectPayload(checked((long)count * sizeof(T)));
        return ReadPart<T>(count);
    }

    /// <summary>
    /// Reads the next <paramref name="count"/> elements of the open section (one part of a payload the caller has
    /// already checked with <see cref="ExpectPayload"/>), allocating as <see cref="ReadArray{T}"/> does.
    /// </summary>
    public unsafe T[] ReadPart<T>(int count)
        where T : unmanaged
    {
        CheckRoom((long)count * sizeof(T));
        if (LengthKnown)
        {
            T[] all = GC.AllocateUninitializedArray<T>(count);
            fixed (T* pinned = all)
            {
                ReadPipelined((byte*)pinned, (long)count * sizeof(T), null);
            }

            return all;
        }

        T[] array = new T[Math.Min(count, FirstGrowthBytes / sizeof(T))];
        int filled = 0;
        while (filled < count)
        {
            if (filled == array.Length)
            {
                Array.Resize(ref array, (int)Math.Min(count, 2L * array.Length));
            }

            int n = Math.Min(array.Length - filled, BlockBytes / sizeof(T));
            Read(array.AsSpan(filled, Math.Max(1, n)));
            filled += Math.Max(1, n);
        }

        return array;
    }

    /// <summary>
    /// Reads <paramref name="rows"/> vectors of the open section straight into <paramref name="buffer"/>, in blocks of
    /// whole rows, and checks each block for non-finite components while it is in cache; then hands the block's rows
    /// to <paramref name="onRows"/> (first row, row count), still in cache, for derived values such as norms. With a
    /// known length, checks and <paramref name="onRows"/> run on a worker while the next block is read.
    /// </summary>
    public unsafe void ReadRows(VectorBuffer buffer, int rows, Action<int, int>? onRows = null)
    {
        int d = buffer.Dimension;
        int rowBytes = d * sizeof(float);
        long bytes = checked((long)rows * rowBytes);
        ExpectPayload(bytes);
        int blockRows = Math.Max(1, BlockBytes / rowBytes);
        if (LengthKnown)
        {
            buffer.Resize(rows);
            if (rows > 0)
            {
                long payloadStart = _position;
                byte* start = (byte*)Unsafe.AsPointer(ref buffer.Row(0));
                ReadPipelined(
                    start,
                    bytes,
                    (offset, length) =>
                    {
                        CheckFinite(new ReadOnlySpan<float>(start + offset, length / sizeof(float)), offset / sizeof(float), d, payloadStart + offset);
                        onRows?.Invoke((int)(offset / rowBytes), length / rowBytes);
                    },
                    blockRows * rowBytes);
            }

            return;
        }

        // Unknown length: grow with the data, block by block.
        for (int start = 0; start < rows; start += blockRows)
        {
            int n = Math.Min(blockRows, rows - start);
            if (buffer.Capacity < start + n)
            {
                buffer.Resize((int)Math.Min(rows, Math.Max(start + n, 2L * buffer.Capacity)));
            }

            Span<float> block = MemoryMarshal.CreateSpan(ref buffer.Row(start), n * d);
            long blockStart = _position;
            Read(MemoryMarshal.AsBytes(block));
            CheckFinite(block, (long)start * d, d, blockStart);
            onRows?.Invoke(start, n);
        }
    }

    /// <summary>
    /// Reads <paramref name="rows"/> one-element rows, the whole payload of the open section, into
    /// <paramref name="column"/> (empty); with a known length in one allocation, otherwise growing as data arrives.
    /// </summary>
    public unsafe void ReadColumn<T>(RowBuffer<T> column, int rows)
        where T : unmanaged
    {
        ExpectPayload(checked((long)rows * sizeof(T)));
        if (LengthKnown)
        {
            if (rows > 0)
            {
                column.Resize(rows);
                ReadPipelined((byte*)Unsafe.AsPointer(ref column.Row(0)), (long)rows * sizeof(T), null);
            }

            return;
        }

        int blockRows = Math.Max(1, BlockBytes / sizeof(T));
        for (int start = 0; start < rows; start += blockRows)
        {
            int n = Math.Min(blockRows, rows - start);
            if (column.Capacity < start + n)
            {
                column.Resize((int)Math.Min(rows, Math.Max(start + n, 2L * column.Capacity)));
            }

            Read(MemoryMarshal.CreateSpan(ref column.Row(start), n));
        }
    }

    /// <summary>Reads the rest of the open section's payload through its checksum without keeping it.</summary>
    public void SkipRest() => SkipPayload();

    private void CheckFinite(ReadOnlySpan<float> block, long firstElement, int d, long fileOffset)
    {
        int bad = FiniteCheck.IndexOfNonFinite(block);
        if (bad >= 0)
        {
            long element = firstElement + bad;
            long offset = fileOffset + ((long)bad * sizeof(float));
            throw new IndexFileException(
                $"Index file section {FileLayout.SectionName(_open.Id)} holds a non-finite vector component ({block[bad].ToString(System.Globalization.CultureInfo.InvariantCulture)}) at row {element / d}, component {element % d}, byte {offset}; stored vectors must be finite.",
                FileLayout.SectionKey(_open.Id),
                offset);
        }
    }

    /// <summary>Checks that the open section's payload was consumed exactly and verifies its checksum.</summary>
    public void CloseSection()
    {
        if (_sectionRead != _open.Length)
        {
            throw SectionProblem($"{_open.Length - _sectionRead} payload bytes were not consumed");
        }

        Span<byte> checksum = stackalloc byte[FileLayout.ChecksumBytes];
        ReadExactly(checksum, SectionName, SectionKey);
        ulong stored = BinaryPrimitives.ReadUInt64LittleEndian(checksum);
        ulong computed = _hash.GetCurrentHashAsUInt64();
        if (stored != computed)
        {
            throw new IndexFileException(
                $"Index file section {SectionName} is damaged: the checksum of its {_open.Length} payload bytes (from byte {_sectionStart}) is {computed:X16}, the stored one {stored:X16}.",
                SectionKey,
                _sectionStart);
        }

        _inSection = false;
    }

    /// <summary>A structural problem inside the open (or last) section, found after its bytes were read.</summary>
    public IndexFileException SectionProblem(string problem)
        => new($"Index file section {SectionName} (payload from byte {_sectionStart}) is invalid: {problem}.", SectionKey, _sectionStart);

    private void CheckRoom(long length)
    {
        if (_sectionRead + length > _open.Length)
        {
            throw SectionProblem($"reading {length} bytes would pass the section's end ({_open.Length} bytes)");
        }
    }

    /// <summary>Checks that the open section's payload has exactly the size the index kind derives from the header.</summary>
    public void ExpectPayload(long bytes)
    {
        if (_open.Length != bytes)
        {
            throw SectionProblem($"its length is {_open.Length} bytes; the header's counts require {bytes}");
        }
    }

    /// <summary>After the last section: every declared section was read, and (for a whole file) nothing follows.</summary>
    public void Finish(bool requireEnd)
    {
        IndexHeader header = _header!;
        while (_nextSection < header.Sections.Count)
        {
            SectionEntry entry = header.Sections[_nextSection];
            if ((entry.Flags & FileLayout.SkippableFlag) == 0 || Enum.IsDefined(typeof(SectionId), entry.Id))
            {
                throw IndexHeader.Malformed($"section {FileLayout.SectionName(entry.Id)} is listed but this index kind does not use it");
            }

            OpenFrame(entry);
            SkipPayload();
            CloseSection();
        }

        if (requireEnd && LengthKnown && _position != _available)
        {
            throw new IndexFileException(
                $"Index file has {_available - _position} unexpected bytes after its last section (which ends at byte {_position}).", "end", _position);
        }
    }

    /// <summary>
    /// Reads every section after the header through its checksum without keeping the bytes (one block of scratch),
    /// whatever its id, then checks that nothing follows when the length is known. Used to verify a file without loading it.
    /// </summary>
    public void VerifyAllSections()
    {
        IndexHeader header = _header!;
        while (_nextSection < header.Sections.Count)
        {
            OpenFrame(header.Sections[_nextSection]);
            SkipPayload();
            CloseSection();
        }

        Finish(requireEnd: true);
    }

    private void CheckCommon(IndexHeader header)
    {
        if (header.Dimension < 1 || header.Dimension > Options.MaxDimension)
        {
            throw IndexHeader.Malformed($"the dimension is {header.Dimension}; expected 1 to {Options.MaxDimension} (the load options' {nameof(IndexLoadOptions.MaxDimension)})");
        }

        if (header.Rows < 0 || header.Rows > Options.MaxCount)
        {
            throw IndexHeader.Malformed($"it declares {header.Rows} stored rows; expected 0 to {Options.MaxCount} (the load options' {nameof(IndexLoadOptions.MaxCount)})");
        }

        if (header.Count < 0 || header.Count > header.Rows)
        {
            throw IndexHeader.Malformed($"it declares {header.Count} items; expected 0 to the {header.Rows} stored rows");
        }

        if (!Enum.IsDefined(header.Metric))
        {
            throw IndexHeader.Malformed($"the metric code is {(int)header.Metric}; expected one of 0 (squared Euclidean), 1 (inner product), 2 (cosine)");
        }

        // The whole file, as declared, must fit in what the stream holds: nothing is allocated before this holds.
        long headerEnd = _position;
        long end = headerEnd;
        foreach (SectionEntry section in header.Sections)
        {
            if (section.Length > Options.MaxSectionBytes)
            {
                throw IndexHeader.Malformed(
                    $"section {FileLayout.SectionName(section.Id)} declares {section.Length} bytes; the load options allow {Options.MaxSectionBytes} ({nameof(IndexLoadOptions.MaxSectionBytes)})");
            }

            try
            {
                end = checked(end + FileLayout.SectionFrameBytes);
                end = checked(end + FileLayout.PaddingAfter(end) + section.Length + FileLayout.ChecksumBytes);
            }
            catch (OverflowException e)
            {
                throw new IndexFileException($"Index file header is invalid: the declared section lengths overflow a 64-bit file size.", "header", FileLayout.PreambleBytes, e);
            }
        }

        _declaredEnd = end;
        if (LengthKnown && end > _available)
        {
            (string where, string key) = WhereDataStops(header, headerEnd, _available);
            throw new IndexFileException(
                $"Index file is truncated: its header declares {end} bytes in all, but the file has only {_available} ({end - _available} missing); it stops in {where}.",
                key,
                _available);
        }
    }

    private void OpenFrame(SectionEntry entry)
    {
        _nextSection++;
        string name = FileLayout.SectionName(entry.Id);
        string key = FileLayout.SectionKey(entry.Id);
        long frameStart = _position;
        Span<byte> frame = stackalloc byte[FileLayout.SectionFrameBytes];
        ReadExactly(frame, name, key);
        uint id = BinaryPrimitives.ReadUInt32LittleEndian(frame);
        uint flags = BinaryPrimitives.ReadUInt32LittleEndian(frame[4..]);
        long length = BinaryPrimitives.ReadInt64LittleEndian(frame[8..]);
        if (id != entry.Id || flags != entry.Flags || length != entry.Length)
        {
            throw new IndexFileException(
                $"Index file section frame at byte {frameStart} says id {id}, flags {flags}, length {length}; the header lists {name} with flags {entry.Flags}, length {entry.Length}.",
                key,
                frameStart);
        }

        int padding = FileLayout.PaddingAfter(_position);
        Span<byte> zeros = stackalloc byte[FileLayout.PayloadAlignment];
        ReadExactly(zeros[..padding], name, key);
        int nonZero = zeros[..padding].IndexOfAnyExcept((byte)0);
        if (nonZero >= 0)
        {
            throw new IndexFileException(
                $"Index file section {name}: padding byte {_position - padding + nonZero} is {zeros[nonZero]:X2}; padding must be zero.", key, _position - padding + nonZero);
        }

        _open = entry;
        _inSection = true;
        _sectionRead = 0;
        _sectionStart = _position;
        _hash.Reset();
    }

    private void SkipPayload()
    {
        byte[] scratch = new byte[(int)Math.Min(_open.Length, BlockBytes)];
        while (_sectionRead < _open.Length)
        {
            Read(scratch.AsSpan(0, (int)Math.Min(scratch.Length, _open.Length - _sectionRead)));
        }
    }

    private void CheckAvailable(string where, long from, long bytes)
    {
        if (LengthKnown && from + bytes > _available)
        {
            throw Truncated(where, where, from, bytes, _available - from);
        }
    }

    private void ReadExactly(Span<byte> destination, string where, string key)
    {
        long start = _position;
        int got = ReadUpTo(destination);
        if (got < destination.Length)
        {
            throw Truncated(where, key, start, destination.Length, got);
        }
    }

    private int ReadUpTo(Span<byte> destination)
    {
        int total = 0;
        while (total < destination.Length)
        {
            int n = _stream.Read(destination[total..]);
            if (n == 0)
            {
                break;
            }

            total += n;
        }

        _position += total;
        return total;
    }

    /// <summary>
    /// The data ran out: says so, with the length expected (the whole index as the header declares it, once read;
    /// before that, what the header needs) and the length found.
    /// </summary>
    private IndexFileException Truncated(string where, string key, long offset, long needed, long got)
    {
        long end = offset + Math.Max(0, got);
        string message = _declaredEnd > 0
            ? $"Index file is truncated: its header declares {_declaredEnd} bytes in all, but the data stops after {end}, in {where} ({needed} bytes were needed from byte {offset})."
            : $"Index file is truncated in {where}: it needs at least {offset + needed} bytes, but the data stops after {end}.";
        return new IndexFileException(message, key, offset);
    }

    /// <summary>The part of the layout that byte <paramref name="stop"/> falls in, for truncation messages.</summary>
    private static (string Where, string Key) WhereDataStops(IndexHeader header, long headerEnd, long stop)
    {
        long at = headerEnd;
        foreach (SectionEntry section in header.Sections)
        {
            at += FileLayout.SectionFrameBytes;
            at += FileLayout.PaddingAfter(at) + section.Length + FileLayout.ChecksumBytes;
            if (stop < at)
            {
                return ($"section {FileLayout.SectionName(section.Id)}, which should end at byte {at}", FileLayout.SectionKey(section.Id));
            }
        }

        return ("the header", "header");
    }
}

using System.Buffers.Binary;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Internal;

namespace VectorKit.Persistence;

/// <summary>
/// Saves indexes to, and loads them from, files and streams in VectorKit's own versioned format: a checksummed
/// MessagePack header, then raw little-endian sections (ids, vectors, links), each with its own XXH3-64 checksum.
/// Every index kind of the library can be saved (<see cref="ExactIndex"/>, <see cref="GraphIndex"/>,
/// <see cref="InvertedFileIndex"/>).
/// </summary>
/// <remarks>
/// <para><b>Atomic saving.</b> <see cref="Save(IVectorIndex, string, CancellationToken)"/> writes a temporary file in
/// the target's folder, flushes it to the disk, renames it over the target and flushes the folder: an exception, a
/// cancellation or a crash part-way leaves the previous file as it was, and a completed save survives a power loss
/// (on Windows the folder is not flushed).</para>
/// <para><b>Consistency.</b> A save sees one consistent state of the index. On every kind, searches run during the
/// save and never wait for it; writes wait until it ends.</para>
/// <para><b>Safe loading.</b> Loading verifies the magic number, the format version, every checksum, every size
/// against <see cref="IndexLoadOptions"/> and against the bytes that remain, and the structure of what it loads;
/// any failure raises <see cref="IndexFileException"/> naming the problem and where it is, and nothing is kept.
/// Use <see cref="IndexLoadOptions.Untrusted"/> for files from elsewhere.</para>
/// <para><b>What is restored.</b> Dimension, metric, ids, vectors (unit length under cosine, as stored), and for a
/// graph its options (except <see cref="GraphIndexOptions.InitialCapacity"/>, a build-time hint), links, levels,
/// entry point and removed slots, and for an inverted file its options, training state, centroids, quantizer, lists
/// and kept full vectors, so searches return exactly what the saved index returned.</para>
/// <para><b>Blocking I/O.</b> Saving and loading read or write the stream synchronously in 1 MiB blocks, checksummed
/// block by block, and check the token between blocks; there are no async variants (a caller that must not block a
/// thread runs the call on a worker of its own choosing).</para>
/// <para><b>Thread safety.</b> All methods are thread-safe; several loads and saves may run at once.</para>
/// </remarks>
public static partial class IndexFile
{
    /// <summary>Writes <paramref name="index"/> to a stream, from its current position.</summary>
    /// <param name="index">An index of a kind the library saves.</param>
    /// <param name="destination">A writable stream; it is flushed, not closed.</param>
    /// <param name="cancellationToken">Checked between 1 MiB blocks; a cancelled save leaves a partial stream.</param>
    /// <exception cref="ArgumentNullException">An argument is null.</exception>
    /// <exception cref="ArgumentException">The index is of a type this library cannot save, or the stream is not writable.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="IOException">The stream failed.</exception>
    public static void Save(IVectorIndex index, Stream destination, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(index);
        ArgumentNullException.ThrowIfNull(destination);
        if (!destination.CanWrite)
        {
            ThrowHelper.ThrowArgument(nameof(destination), "The destination stream is not writable.");
        }

        IndexCodec codec = CodecFor(index);
        CheckByteOrder();

        // Small writes (frames, link blocks) are gathered; large ones pass straight through to the stream.
        var buffered = new BufferedStream(destination, 1 << 20);
        codec.Save(index, new IndexFileWriter(buffered, cancellationToken, index as Indexes.VectorIndex));
        buffered.Flush();
    }

    /// <summary>Writes <paramref name="index"/> to a file, atomically: the previous file stays intact until the new one is complete and on disk.</summary>
    /// <param name="index">An index of a kind the library saves.</param>
    /// <param name="path">The file to create or replace. Its folder must exist.</param>
    /// <param name="cancellationToken">Checked between 1 MiB blocks; a cancelled save leaves the previous file as it was.</param>
    /// <remarks>
    /// The data goes to a hidden temporary file beside <paramref name="path"/>, which is flushed to the disk and then
    /// renamed over <paramref name="path"/> (a single rename, atomic on the same volume); on Linux and macOS the folder
    /// is then flushed too, so the rename survives a power loss (on Windows it is not: a power cut right after the
    /// rename may bring back the previous file, never a mix). On failure the temporary file is deleted. A process
    /// killed part-way cannot delete its temporary file;
    /// <see cref="DeleteTemporaryFiles(string)"/> removes such leftovers.
    /// </remarks>
    /// <exception cref="ArgumentNullException">An argument is null.</exception>
    /// <exception cref="ArgumentException">The index is of a type this library cannot save, or the path is empty or names a folder.</exception>
    /// <exception cref="ObjectDisposedException">The index was disposed.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="DirectoryNotFoundException">The folder of <paramref name="path"/> does not exist; the message names <paramref name="path"/> and the folder.</exception>
    /// <exception cref="IOException">Creating, writing (for example on a full disk) or renaming the temporary file, or flushing the folder after the rename, failed; the message names <paramref name="path"/> and the failing step, the inner exception is the system's own, and the HResult is kept.</exception>
    /// <exception cref="UnauthorizedAccessException">The folder or the target is not writable; the message names <paramref name="path"/>.</exception>
    public static void Save(IVectorIndex index, string path, CancellationToken cancellationToken = default)
        => SaveAtomically(index, path, static stream => stream, cancellationToken);

    /// <summary>Reads an index of any kind from a stream, from its current position; reads no further than the index's last byte.</summary>
    /// <param name="source">A readable stream. When it is seekable, every declared size is checked against its length before allocating.</param>
    /// <param name="options">Caps; <see langword="null"/> for <see cref="IndexLoadOptions.Default"/>. Use <see cref="IndexLoadOptions.Untrusted"/> for files from elsewhere.</param>
    /// <param name="cancellationToken">Checked between 1 MiB blocks.</param>
    /// <returns>The loaded index; the caller owns (and disposes) it. Its concrete type is given by the file (<see cref="ExactIndex"/>, <see cref="GraphIndex"/> or <see cref="InvertedFileIndex"/>).</returns>
    /// <exception cref="ArgumentNullException"><paramref name="source"/> is null.</exception>
    /// <exception cref="IndexFileException">The data is not an index file, is damaged, truncated or inconsistent, exceeds a cap, or has an unsupported format version.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="IOException">The stream failed.</exception>
    public static IVectorIndex Load(Stream source, IndexLoadOptions? options = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(source);
        return LoadCore(source, options, null, requireEnd: false, cancellationToken);
    }

    /// <summary>Reads an index of any kind from a file; the file must hold exactly one index and nothing after it.</summary>
    /// <param name="path">The file.</param>
    /// <param name="options">Caps; <see langword="null"/> for <see cref="IndexLoadOptions.Default"/>.</param>
    /// <param name="cancellationToken">Checked between 1 MiB blocks.</param>
    /// <returns>The loaded index; the caller owns (and disposes) it.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is null.</exception>
    /// <exception cref="IndexFileException">The file is not an index file, is damaged, truncated or inconsistent, exceeds a cap, or has an unsupported format version; the message names the file, and <see cref="IndexFileException.FilePath"/> holds its full path.</exception>
    /// <exception cref="FileNotFoundException">The file does not exist.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="IOException">Reading failed.</exception>
    public static IVectorIndex Load(string path, IndexLoadOptions? options = null, CancellationToken cancellationToken = default)
        => LoadFile(path, options, null, cancellationToken);

    /// <summary>Reads an index of a known type from a stream; fails before reading the sections when the file holds another kind.</summary>
    /// <typeparam name="TIndex"><see cref="ExactIndex"/>, <see cref="GraphIndex"/>, <see cref="InvertedFileIndex"/> or <see cref="IVectorIndex"/>.</typeparam>
    /// <param name="source">A readable stream.</param>
    /// <param name="options">Caps; <see langword="null"/> for <see cref="IndexLoadOptions.Default"/>.</param>
    /// <param name="cancellationToken">Checked between 1 MiB blocks.</param>
    /// <returns>The loaded index; the caller owns (and disposes) it.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="source"/> is null.</exception>
    /// <exception cref="IndexFileException">The file holds another kind of index, or as for <see cref="Load(Stream, IndexLoadOptions?, CancellationToken)"/>.</exception>
    public static TIndex Load<TIndex>(Stream source, IndexLoadOptions? options = null, CancellationToken cancellationToken = default)
        where TIndex : class, IVectorIndex
    {
        ArgumentNullException.ThrowIfNull(source);
        return (TIndex)LoadCore(source, options, typeof(TIndex), requireEnd: false, cancellationToken);
    }

    /// <summary>Reads an index of a known type from a file; fails before reading the sections when the file holds another kind.</summary>
    /// <typeparam name="TIndex"><see cref="ExactIndex"/>, <see cref="GraphIndex"/>, <see cref="InvertedFileIndex"/> or <see cref="IVectorIndex"/>.</typeparam>
    /// <param name="path">The file.</param>
    /// <param name="options">Caps; <see langword="null"/> for <see cref="IndexLoadOptions.Default"/>.</param>
    /// <param name="cancellationToken">Checked between 1 MiB blocks.</param>
    /// <returns>The loaded index; the caller owns (and disposes) it.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is null.</exception>
    /// <exception cref="IndexFileException">The file holds another kind of index, or as for <see cref="Load(string, IndexLoadOptions?, CancellationToken)"/>; the message names the file, and <see cref="IndexFileException.FilePath"/> holds its full path.</exception>
    public static TIndex Load<TIndex>(string path, IndexLoadOptions? options = null, CancellationToken cancellationToken = default)
        where TIndex : class, IVectorIndex
        => (TIndex)LoadFile(path, options, typeof(TIndex), cancellationToken);

    /// <summary>
    /// Reads what a saved index file holds (kind, metric, dimension, counts, stored settings, sections and their
    /// sizes) from its header, without loading the index; optionally verifies every section's checksum as well.
    /// </summary>
    /// <param name="path">The index file.</param>
    /// <param name="verifySections">
    /// <see langword="true"/> to read every section through its checksum (the whole file is read, one 1 MiB block at a
    /// time, nothing is kept); <see langword="false"/> to read the header only (its own checksum is always verified).
    /// </param>
    /// <param name="options">Caps; <see langword="null"/> for <see cref="IndexLoadOptions.Default"/>.</param>
    /// <param name="cancellationToken">Checked between 1 MiB blocks.</param>
    /// <returns>The summary; <see cref="IndexFileSummary.SectionsVerified"/> says whether the sections were checked.</returns>
    /// <remarks>
    /// A file that inspects cleanly with <paramref name="verifySections"/> can still fail to load when a section's
    /// content is structurally invalid (a link out of range, a non-finite vector): only loading checks the content.
    /// </remarks>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is null.</exception>
    /// <exception cref="IndexFileException">The header is damaged, truncated or malformed, exceeds a cap or has an unsupported version; or, when verifying, a section is damaged or truncated, or bytes follow the last section.</exception>
    /// <exception cref="FileNotFoundException">The file does not exist.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="IOException">Reading failed.</exception>
    public static IndexFileSummary Inspect(string path, bool verifySections = false, IndexLoadOptions? options = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(path);
        CheckByteOrder();
        using var file = new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read, bufferSize: 0, FileOptions.SequentialScan);
        var reader = new IndexFileReader(file, options ?? IndexLoadOptions.Default, cancellationToken);
        try
        {
            IndexHeader header = reader.ReadHeader();
            if (verifySections)
            {
                reader.VerifyAllSections();
            }

            var settings = new SortedDictionary<string, double>(StringComparer.Ordinal);
            foreach ((string key, long value) in header.Integers)
            {
                settings[key] = value;
            }

            foreach ((string key, double value) in header.Reals)
            {
                settings[key] = value;
            }

            var sections = new IndexFileSection[header.Sections.Count];
            for (int i = 0; i < sections.Length; i++)
            {
                SectionEntry entry = header.Sections[i];
                sections[i] = new IndexFileSection(checked((int)entry.Id), FileLayout.SectionKey(entry.Id), entry.Length);
            }

            return new IndexFileSummary(
                header.Kind, header.Metric, header.Dimension, header.Count, header.Rows, reader.FormatVersion,
                settings.AsReadOnly(), sections, file.Length, verifySections);
        }
        catch (OverflowException e)
        {
            throw new IndexFileException($"Index file declares sizes that overflow (in {reader.SectionName}, near byte {reader.Position}).", reader.SectionKey, reader.Position, e);
        }
    }

    /// <summary>
    /// Deletes the temporary files that interrupted saves to <paramref name="path"/> left beside it (a save killed
    /// with its process, or cut off by a power loss, cannot remove its own). Leaves the file itself, and every other
    /// file, untouched.
    /// </summary>
    /// <param name="path">The index file whose saves left the temporaries; it need not exist.</param>
    /// <returns>The full paths of the files deleted, in ordinal order; empty when there were none or the folder does not exist.</returns>
    /// <remarks>
    /// A save to <c>name</c> writes <c>.name.</c><i>32 hexadecimal digits</i><c>.tmp</c> in the same folder; only
    /// names of exactly that shape are deleted. Call it when no save to <paramref name="path"/> is running (at start-up,
    /// for example): a save whose temporary file is deleted under it fails at the rename and leaves the previous file
    /// as it was. A leftover temporary is never needed to recover an index: the previous file at
    /// <paramref name="path"/> is complete. A temporary cut short fails to load as truncated.
    /// </remarks>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is null.</exception>
    /// <exception cref="ArgumentException"><paramref name="path"/> is empty.</exception>
    /// <exception cref="IOException">A temporary file could not be deleted.</exception>
    /// <exception cref="UnauthorizedAccessException">The folder or a temporary file may not be changed.</exception>
    public static IReadOnlyList<string> DeleteTemporaryFiles(string path)
    {
        ArgumentException.ThrowIfNullOrEmpty(path);
        string target = Path.GetFullPath(path);
        string folder = Path.GetDirectoryName(target) ?? ".";
        string name = Path.GetFileName(target);
        if (name.Length == 0 || !Directory.Exists(folder))
        {
            return [];
        }

        var deleted = new List<string>();
        foreach (string file in Directory.EnumerateFiles(folder, $".{name}.*.tmp", SearchOption.TopDirectoryOnly))
        {
            if (IsTemporaryFor(Path.GetFileName(file), name))
            {
                File.Delete(file);
                deleted.Add(file);
            }
        }

        deleted.Sort(StringComparer.Ordinal);
        return deleted;
    }

    /// <summary>Whether <paramref name="fileName"/> has the exact shape of a temporary file of a save to <paramref name="targetName"/>.</summary>
    internal static bool IsTemporaryFor(string fileName, string targetName) => DurableFile.IsTemporaryFor(fileName, targetName);

    /// <summary>Atomic save with a hook that wraps the file stream (tests inject failures through it).</summary>
    internal static void SaveAtomically(IVectorIndex index, string path, Func<Stream, Stream> wrap, CancellationToken cancellationToken)
    {
        ArgumentNullException.ThrowIfNull(index);
        ArgumentException.ThrowIfNullOrEmpty(path);
        CodecFor(index);
        using DurableFile file = DurableFile.Begin(path, nameof(path), "save the index to", bufferSize: 0, wrap);
        file.Write(stream => Save(index, stream, cancellationToken));

        // A token cancelled while the last block was written still wins: the target is not replaced.
        file.Commit(cancellationToken);
    }

    private static IVectorIndex LoadFile(string path, IndexLoadOptions? options, Type? expected, CancellationToken cancellationToken)
    {
        ArgumentNullException.ThrowIfNull(path);
        using var file = new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read, bufferSize: 0, FileOptions.SequentialScan);
        try
        {
            return LoadCore(file, options, expected, requireEnd: true, cancellationToken);
        }
        catch (IndexFileException e)
        {
            // Same exception object, so its section, offset, inner exception and stack stay as they were.
            e.AttachFilePath(file.Name);
            throw;
        }
    }

    private static IVectorIndex LoadCore(Stream source, IndexLoadOptions? options, Type? expected, bool requireEnd, CancellationToken cancellationToken)
    {
        if (!source.CanRead)
        {
            ThrowHelper.ThrowArgument(nameof(source), "The source stream is not readable.");
        }

        CheckByteOrder();
        var reader = new IndexFileReader(source, options ?? IndexLoadOptions.Default, cancellationToken);
        try
        {
            IndexHeader header = reader.ReadHeader();
            IndexCodec codec = IndexCodecs.ForKind(header.Kind)
                ?? throw IndexHeader.Malformed($"the index kind is {(int)header.Kind}, which this library does not know (it knows {string.Join(", ", Enum.GetValues<IndexKind>().Select(k => $"{(int)k} = {k}"))})");
            if (expected is not null && !expected.IsAssignableFrom(codec.IndexType))
            {
                throw new IndexFileException($"Index file holds {Article(codec.IndexType.Name)}; {Article(expected.Name)} was requested.", "header", FileLayout.PreambleBytes);
            }

            IVectorIndex index = codec.Load(header, reader);
            try
            {
                TuningFields.Read(header, index);
                reader.Finish(requireEnd);
            }
            catch
            {
                index.Dispose();
                throw;
            }

            return index;
        }
        catch (OverflowException e)
        {
            throw new IndexFileException($"Index file declares sizes that overflow (in {reader.SectionName}, near byte {reader.Position}).", reader.SectionKey, reader.Position, e);
        }
    }

    private static string Article(string name) => ("AEIOU".Contains(name[0], StringComparison.Ordinal) ? "an " : "a ") + name;

    private static IndexCodec CodecFor(IVectorIndex index)
    {
        IndexCodec? codec = IndexCodecs.ForIndex(index);
        if (codec is null)
        {
            ThrowHelper.ThrowArgument(nameof(index), $"An index of type {index.GetType().Name} cannot be saved; the library saves {IndexCodecs.SupportedTypes}.");
        }

        return codec;
    }

    // The sections are raw little-endian blocks copied straight to and from memory.
    private static void CheckByteOrder()
    {
        if (!BitConverter.IsLittleEndian)
        {
            throw new PlatformNotSupportedException("Index files are read and written on little-endian processors only.");
        }
    }
}

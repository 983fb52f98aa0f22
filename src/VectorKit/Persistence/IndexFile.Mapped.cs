using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Persistence;

public static partial class IndexFile
{
    /// <summary>
    /// Opens a saved index for searching by mapping its file read-only into memory: ids, rows and codes are read in
    /// place from the page cache (shared with every process that maps or reads the same file), never copied into the
    /// process. The returned index is read-only; wrap it in a <see cref="SegmentedIndex"/> to take writes.
    /// </summary>
    /// <param name="path">A file written by <see cref="Save(IVectorIndex, string, CancellationToken)"/>; it must hold exactly one index.</param>
    /// <param name="options">Caps and verification; <see langword="null"/> for <see cref="MappedOpenOptions.Default"/>. Use <see cref="MappedOpenOptions.Untrusted"/> for files from elsewhere.</param>
    /// <param name="cancellationToken">Checked between 1 MiB blocks while verifying.</param>
    /// <returns>
    /// A read-only <see cref="ExactIndex"/> (<see cref="ExactIndex.IsMapped"/> is true; adds, removals, training and
    /// <see cref="ExactIndex.Compact"/> throw <see cref="NotSupportedException"/>). Disposing it unmaps the file.
    /// </returns>
    /// <remarks>
    /// <para><b>Open time.</b> For a file of format version 3 the open reads the header and the small sections only
    /// (<see cref="MappedOpenOptions"/> says what is checked when); ids are found by binary search over the file's id
    /// order. A file of version 1 or 2 has no id order, so its ids are hashed into a table at open (time and memory
    /// grow with the count); save it again to get version 3.</para>
    /// <para><b>Kinds.</b> Every variant of the exact index (float32; 8-bit codes with full vectors kept, external, or
    /// none). Graph and inverted-file files are refused with <see cref="NotSupportedException"/>: their links and lists
    /// are rebuilt into arrays at load, so nothing of them could be read in place without a new layout.</para>
    /// <para><b>Searches.</b> Single searches run the same scan as a loaded index and return the same bits; a batch
    /// search runs the single-query scan per query (the tiled batch path needs per-row norms the file does not hold).</para>
    /// <para><b>The file.</b> It stays open and mapped until the index is disposed. An atomic save over the same path
    /// replaces the file by a rename and leaves the mapping on the old contents; never truncate or rewrite a mapped
    /// file in place (the process would fault on the missing pages).</para>
    /// </remarks>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is null.</exception>
    /// <exception cref="IndexFileException">The file is not an index file, is damaged, truncated or inconsistent, exceeds a cap, or has an unsupported format version; the message names the file.</exception>
    /// <exception cref="NotSupportedException">The file holds a graph or inverted-file index.</exception>
    /// <exception cref="FileNotFoundException">The file does not exist.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="IOException">Opening or mapping the file failed.</exception>
    public static ExactIndex OpenMapped(string path, MappedOpenOptions? options = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(path);
        CheckByteOrder();
        options ??= MappedOpenOptions.Default;
        MappedFileView view;
        try
        {
            view = MappedFileView.Open(path);
        }
        catch (IndexFileException e)
        {
            e.AttachFilePath(Path.GetFullPath(path));
            throw;
        }

        try
        {
            unsafe
            {
                using var stream = new UnmanagedMemoryStream(view.Start, view.Length);
                var reader = new IndexFileReader(stream, options.Load, cancellationToken);
                IndexHeader header = reader.ReadHeader();
                if (header.Kind != IndexKind.Exact)
                {
                    throw new NotSupportedException(
                        $"The index file '{path}' holds {(header.Kind == IndexKind.Graph ? "a graph" : header.Kind == IndexKind.InvertedFile ? "an inverted-file" : $"a kind {(int)header.Kind}")} index, which cannot be opened mapped: "
                        + "only the exact index is read in place (graph links and inverted lists are rebuilt into arrays at load). Load it with IndexFile.Load.");
                }

                var sections = new MappedSections(view, header, reader.Position);
                ExactIndex index = ExactIndexCodec.OpenMapped(header, view, sections, options.VerifyContents, cancellationToken);
                try
                {
                    TuningFields.Read(header, index);
                }
                catch
                {
                    index.Dispose();
                    throw;
                }

                return index;
            }
        }
        catch (IndexFileException e)
        {
            view.Dispose();
            e.AttachFilePath(Path.GetFullPath(path));
            throw;
        }
        catch (OverflowException e)
        {
            view.Dispose();
            var wrapped = new IndexFileException("Index file declares sizes that overflow.", "header", -1, e);
            wrapped.AttachFilePath(Path.GetFullPath(path));
            throw wrapped;
        }
        catch
        {
            view.Dispose();
            throw;
        }
    }
}

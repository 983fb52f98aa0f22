using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Persistence;

public static partial class IndexFile
{
    /// <summary>
    /// Opens a saved index for searching by mapping its file read-only into memory: ids, rows, codes, list contents and
    /// graph links are read in place from the page cache (shared with every process that maps or reads the same file),
    /// never copied into the process. The returned index is read-only; wrap it in a <see cref="SegmentedIndex"/> to take
    /// writes (any kind whose searches return full-precision distances: float32, or codes re-scored on full vectors kept
    /// in the file).
    /// </summary>
    /// <param name="path">A file written by <see cref="Save(IVectorIndex, string, CancellationToken)"/>; it must hold exactly one index.</param>
    /// <param name="options">Caps and verification; <see langword="null"/> for <see cref="MappedOpenOptions.Default"/>. Use <see cref="MappedOpenOptions.Untrusted"/> for files from elsewhere.</param>
    /// <param name="cancellationToken">Checked between 1 MiB blocks while verifying.</param>
    /// <returns>
    /// A read-only <see cref="ExactIndex"/>, <see cref="InvertedFileIndex"/> or <see cref="GraphIndex"/> (its
    /// <c>IsMapped</c> is true; adds, removals, training and <c>Compact</c> throw <see cref="NotSupportedException"/>).
    /// Disposing it unmaps the file.
    /// </returns>
    /// <remarks>
    /// <para><b>Open time.</b> For a file of the current format version the open reads the header and the small sections
    /// only (code ranges, centroids, codebooks, list lengths; <see cref="MappedOpenOptions"/> says what is checked when);
    /// ids are found by binary search over the file's id order, and a graph reads its levels and where each node's
    /// upper-layer links start in place. A graph of format version 5 or older has those starts built from its levels at
    /// open (four bytes per node, one pass that grows with the count). A file without an id order (an exact index of format version 1 or 2, an inverted file of 1 to 3, a
    /// graph of 1 or 2) has its ids hashed into a table at open (time and memory grow with the count); save it again to
    /// get the current version.</para>
    /// <para><b>Kinds.</b> Every variant of the exact index and of the graph (float32; 8-bit codes with full vectors
    /// kept, external, or none) and of the inverted file (float32, 8-bit, product codes in either layout; full vectors
    /// kept or external). A fast-scan inverted file of format version 1 to 3 that holds entries is refused with
    /// <see cref="NotSupportedException"/> (its codes are not stored in the search's blocks). An index that re-scores
    /// from an external source needs the source attached (<see cref="IExternalFullVectors.AttachFullVectors"/>) before
    /// it re-scores, as after a load.</para>
    /// <para><b>Searches.</b> Single searches run the same scan or walk as a loaded index and return the same bits. The exact
    /// index's batch search runs the single-query scan per query (the tiled batch path needs per-row norms the file
    /// does not hold).</para>
    /// <para><b>The file.</b> It stays open and mapped until the index is disposed. An atomic save over the same path
    /// replaces the file by a rename and leaves the mapping on the old contents; never truncate or rewrite a mapped
    /// file in place (the process would fault on the missing pages).</para>
    /// </remarks>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is null.</exception>
    /// <exception cref="IndexFileException">The file is not an index file, is damaged, truncated or inconsistent, exceeds a cap, or has an unsupported format version; the message names the file.</exception>
    /// <exception cref="NotSupportedException">The file holds a fast-scan inverted file of format version 1 to 3 that holds entries.</exception>
    /// <exception cref="FileNotFoundException">The file does not exist.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="IOException">Opening or mapping the file failed.</exception>
    public static IVectorIndex OpenMapped(string path, MappedOpenOptions? options = null, CancellationToken cancellationToken = default)
        => OpenMappedCore(path, options, null, cancellationToken);

    /// <summary>Opens a saved index of a known type by mapping its file; fails before mapping any section when the file holds another kind.</summary>
    /// <typeparam name="TIndex"><see cref="ExactIndex"/>, <see cref="InvertedFileIndex"/>, <see cref="GraphIndex"/> or <see cref="IVectorIndex"/>.</typeparam>
    /// <param name="path">As for <see cref="OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>.</param>
    /// <param name="options">Caps and verification; <see langword="null"/> for <see cref="MappedOpenOptions.Default"/>.</param>
    /// <param name="cancellationToken">Checked between 1 MiB blocks while verifying.</param>
    /// <returns>The read-only mapped index; disposing it unmaps the file.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is null.</exception>
    /// <exception cref="IndexFileException">The file holds another kind of index, or as for <see cref="OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>.</exception>
    /// <exception cref="NotSupportedException">As for <see cref="OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>.</exception>
    /// <exception cref="FileNotFoundException">The file does not exist.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    /// <exception cref="IOException">Opening or mapping the file failed.</exception>
    public static TIndex OpenMapped<TIndex>(string path, MappedOpenOptions? options = null, CancellationToken cancellationToken = default)
        where TIndex : class, IVectorIndex
        => (TIndex)OpenMappedCore(path, options, typeof(TIndex), cancellationToken);

    private static IVectorIndex OpenMappedCore(string path, MappedOpenOptions? options, Type? expected, CancellationToken cancellationToken)
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
                IndexCodec codec = IndexCodecs.ForKind(header.Kind)
                    ?? throw IndexHeader.Malformed($"the index kind is {(int)header.Kind}, which this library does not know");
                if (expected is not null && !expected.IsAssignableFrom(codec.IndexType))
                {
                    throw new IndexFileException($"Index file holds {Article(codec.IndexType.Name)}; {Article(expected.Name)} was requested.", "header", FileLayout.PreambleBytes);
                }

                var sections = new MappedSections(view, header, reader.Position);
                VectorIndex index = header.Kind switch
                {
                    IndexKind.Exact => ExactIndexCodec.OpenMapped(header, view, sections, options.VerifyContents, cancellationToken),
                    IndexKind.Graph => GraphIndexCodec.OpenMapped(header, view, sections, options.Load, options.VerifyContents, cancellationToken),
                    _ => InvertedFileIndexCodec.OpenMapped(header, view, sections, options.VerifyContents, cancellationToken),
                };
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

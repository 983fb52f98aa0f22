using VectorKit.Evaluation;
using VectorKit.IO;
using VectorKit.Persistence;

namespace VectorKit.Cli;

/// <summary>The vector file formats the tool reads.</summary>
internal enum DataFormat
{
    Auto,
    Fvecs,
    Bvecs,
    Npy,
    Idx,
    Csv,
}

/// <summary>
/// Opens input files through the library's readers and turns every way they can fail into an
/// <see cref="InputFileException"/> naming the file (the library's messages carry the byte offset).
/// </summary>
internal static class VectorFiles
{
    public static DataFormat Detect(string path, DataFormat given)
    {
        if (given != DataFormat.Auto)
        {
            return given;
        }

        string name = Path.GetFileName(path).ToLowerInvariant();
        if (name.EndsWith(".gz", StringComparison.Ordinal))
        {
            name = name[..^3];
        }

        return name switch
        {
            _ when name.EndsWith(".fvecs", StringComparison.Ordinal) => DataFormat.Fvecs,
            _ when name.EndsWith(".bvecs", StringComparison.Ordinal) => DataFormat.Bvecs,
            _ when name.EndsWith(".npy", StringComparison.Ordinal) => DataFormat.Npy,
            _ when name.EndsWith(".csv", StringComparison.Ordinal) => DataFormat.Csv,
            _ when name.EndsWith("-ubyte", StringComparison.Ordinal) || name.EndsWith(".idx", StringComparison.Ordinal) => DataFormat.Idx,
            _ => throw new UsageException($"cannot tell the format of '{path}' from its name; give it with --data-format (fvecs, bvecs, npy, idx, csv)"),
        };
    }

    /// <summary>Reads a whole vector file into memory.</summary>
    public static VectorSet ReadAll(string path, DataFormat format, CancellationToken cancellationToken)
    {
        DataFormat actual = Detect(path, format);
        return Guard(path, () =>
        {
            if (actual == DataFormat.Csv)
            {
                return CsvVectors.Read(path, cancellationToken: cancellationToken);
            }

            using VectorReader reader = OpenReader(path, actual);
            return reader.ReadToEnd(cancellationToken);
        });
    }

    /// <summary>The dimension and row count of a file, reading only its header (CSV: the whole file).</summary>
    public static (int Dimension, long Count) Shape(string path, DataFormat format, CancellationToken cancellationToken)
    {
        DataFormat actual = Detect(path, format);
        if (actual == DataFormat.Csv)
        {
            VectorSet all = ReadAll(path, actual, cancellationToken);
            return (all.Dimension, all.Count);
        }

        return Guard(path, () =>
        {
            using VectorReader reader = OpenReader(path, actual);
            if (reader.Count >= 0)
            {
                return (reader.Dimension, reader.Count);
            }

            // The length does not say the count (a compressed stream, or a length that is not a whole number of
            // rows): read through once; a truncated or ragged file fails here with the row and the byte offset.
            long rows = 0;
            foreach (VectorSet block in reader.ReadBlocks(8192, cancellationToken))
            {
                rows += block.Count;
            }

            return (reader.Dimension, rows);
        });
    }

    /// <summary>
    /// The rows <c>[first, first + count)</c> of a file in blocks of at most <paramref name="rowsPerBlock"/>, streamed
    /// (CSV is read whole first). Failures while reading surface as <see cref="InputFileException"/>.
    /// </summary>
    public static IEnumerable<VectorSet> ReadBlocks(string path, DataFormat format, long first, long count, int rowsPerBlock, CancellationToken cancellationToken)
    {
        DataFormat actual = Detect(path, format);
        if (actual == DataFormat.Csv)
        {
            VectorSet all = ReadAll(path, actual, cancellationToken);
            long end = Math.Min(all.Count, first + count);
            for (long start = first; start < end; start += rowsPerBlock)
            {
                int rows = (int)Math.Min(rowsPerBlock, end - start);
                yield return new VectorSet(all.Data.AsSpan(checked((int)(start * all.Dimension)), rows * all.Dimension).ToArray(), all.Dimension);
            }

            yield break;
        }

        VectorReader reader = Guard(path, () => OpenReader(path, actual));
        try
        {
            // Rows before the range are read and dropped in blocks: the formats do not all allow seeking (gzip idx).
            long skipped = 0;
            long delivered = 0;
            using IEnumerator<VectorSet> blocks = reader.ReadBlocks(rowsPerBlock, cancellationToken).GetEnumerator();
            while (delivered < count)
            {
                if (!Guard(path, blocks.MoveNext))
                {
                    yield break;
                }

                VectorSet block = blocks.Current;
                int from = 0;
                if (skipped < first)
                {
                    from = (int)Math.Min(block.Count, first - skipped);
                    skipped += from;
                }

                int rows = (int)Math.Min(block.Count - from, count - delivered);
                if (rows <= 0)
                {
                    continue;
                }

                delivered += rows;
                yield return from == 0 && rows == block.Count
                    ? block
                    : new VectorSet(block.Data.AsSpan(from * block.Dimension, rows * block.Dimension).ToArray(), block.Dimension);
            }
        }
        finally
        {
            reader.Dispose();
        }
    }

    /// <summary>
    /// Item ids, one per data row: an .ivecs file with one value per row, an integer .npy (one column), or a text file
    /// with one integer per line.
    /// </summary>
    public static long[] ReadIds(string path, CancellationToken cancellationToken)
    {
        string name = path.ToLowerInvariant();
        return Guard(path, () =>
        {
            if (name.EndsWith(".ivecs", StringComparison.Ordinal) || name.EndsWith(".npy", StringComparison.Ordinal))
            {
                IntVectorSet rows = name.EndsWith(".ivecs", StringComparison.Ordinal) ? VecsFile.ReadIvecs(path) : NpyFile.ReadIntegers(path);
                if (rows.Dimension != 1)
                {
                    throw new InputFileException(path, $"an id file holds one id per row; this one has {rows.Dimension} values per row");
                }

                return Array.ConvertAll(rows.Data, v => (long)v);
            }

            var ids = new List<long>();
            long line = 0;
            foreach (string text in File.ReadLines(path))
            {
                cancellationToken.ThrowIfCancellationRequested();
                line++;
                if (text.Length == 0)
                {
                    continue;
                }

                if (!long.TryParse(text.AsSpan().Trim(), System.Globalization.NumberStyles.Integer, System.Globalization.CultureInfo.InvariantCulture, out long id))
                {
                    throw new InputFileException(path, $"line {line} is not an integer id: '{Shorten(text)}'");
                }

                ids.Add(id);
            }

            return ids.ToArray();
        });
    }

    /// <summary>A ground-truth table: .ivecs (one row of neighbour ids per query) or an integer .npy.</summary>
    public static NeighborTable ReadNeighbors(string path)
    {
        string name = path.ToLowerInvariant();
        return Guard(path, () => name.EndsWith(".npy", StringComparison.Ordinal)
            ? NpyFile.ReadNeighbors(path)
            : VecsFile.ReadNeighbors(path));
    }

    /// <summary>Loads a saved index; a damaged or foreign file becomes an <see cref="InputFileException"/> with the byte offset.</summary>
    /// <remarks>
    /// Checksums and structure are always verified; <paramref name="untrusted"/> adds the library's caps for files from
    /// elsewhere, which also refuse legitimate indexes with sections over 2 GiB, so they are opt-in.
    /// </remarks>
    public static Indexes.IVectorIndex LoadIndex(string path, bool untrusted, CancellationToken cancellationToken)
        => Guard(path, () => IndexFile.Load(path, untrusted ? IndexLoadOptions.Untrusted : IndexLoadOptions.Default, cancellationToken));

    /// <summary>A data file (.fvecs or float32 .npy) as the full-vector source of a compressed index that re-scores from a file.</summary>
    public static FileVectorSource OpenFullVectors(string path, long[]? ids)
    {
        string name = path.ToLowerInvariant();
        if (!name.EndsWith(".fvecs", StringComparison.Ordinal) && !name.EndsWith(".npy", StringComparison.Ordinal))
        {
            throw new UsageException($"full vectors are read from .fvecs or float32 .npy files; '{path}' is neither");
        }

        return Guard(path, () =>
        {
            try
            {
                return name.EndsWith(".npy", StringComparison.Ordinal) ? FileVectorSource.OpenNpy(path, ids) : FileVectorSource.OpenFvecs(path, ids);
            }
            catch (ArgumentException e)
            {
                throw new InputFileException(path, e.Message, e);
            }
        });
    }

    /// <summary>
    /// Attaches <paramref name="fullVectorsPath"/> to an index saved with its full vectors in an external file; returns
    /// the source (the caller disposes it after the index), or null when the index does not need one.
    /// </summary>
    public static FileVectorSource? AttachFullVectors(Indexes.IVectorIndex index, string indexPath, string? fullVectorsPath, long[]? ids)
    {
        if (index is not Indexes.IExternalFullVectors { ReadsFullVectorsExternally: true } external)
        {
            return fullVectorsPath is null ? null : throw new UsageException($"the index '{indexPath}' keeps its own full vectors; --full-vectors is not needed");
        }

        if (fullVectorsPath is null)
        {
            throw new UsageException($"the index '{indexPath}' re-scores with full vectors from an external file; give that file with --full-vectors");
        }

        FileVectorSource source = OpenFullVectors(fullVectorsPath, ids);
        try
        {
            external.AttachFullVectors(source);
            return source;
        }
        catch (ArgumentException e)
        {
            source.Dispose();
            throw new InputFileException(fullVectorsPath, e.Message, e);
        }
    }

    /// <summary>Runs <paramref name="read"/>, turning read failures into <see cref="InputFileException"/>.</summary>
    public static T Guard<T>(string path, Func<T> read)
    {
        try
        {
            return read();
        }
        catch (IndexFileException e)
        {
            string where = e.Section is null ? $"at byte {e.Offset}" : $"at byte {e.Offset} ({e.Section})";
            throw new InputFileException(path, $"{where}: {e.Message}", e);
        }
        catch (DataFormatException e)
        {
            throw new InputFileException(path, e.Message, e);
        }
        catch (FileNotFoundException e)
        {
            throw new InputFileException(path, "the file does not exist", e);
        }
        catch (DirectoryNotFoundException e)
        {
            throw new InputFileException(path, "its folder does not exist", e);
        }
        catch (UnauthorizedAccessException e)
        {
            throw new InputFileException(path, "permission denied", e);
        }
        catch (IOException e) when (e is not EndOfStreamException)
        {
            throw new InputFileException(path, e.Message, e);
        }
        catch (EndOfStreamException e)
        {
            throw new InputFileException(path, $"the file ends early: {e.Message}", e);
        }
    }

    private static VectorReader OpenReader(string path, DataFormat format) => format switch
    {
        DataFormat.Fvecs => VecsReader.Open(path, VecsElementType.Float32),
        DataFormat.Bvecs => VecsReader.Open(path, VecsElementType.UInt8),
        DataFormat.Npy => NpyReader.Open(path),
        DataFormat.Idx => IdxReader.Open(path),
        _ => throw new UsageException($"'{path}': the {format} format is not streamed"),
    };

    private static string Shorten(string text) => text.Length <= 40 ? text : text[..40] + "…";
}

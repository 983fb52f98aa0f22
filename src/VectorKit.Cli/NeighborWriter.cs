using System.Buffers.Binary;
using System.Globalization;
using System.Text;
using VectorKit.Indexes;

namespace VectorKit.Cli;

/// <summary>The result formats of <c>search</c>.</summary>
internal enum ResultFormat
{
    /// <summary><c>name.ivecs</c> (ids, int32) and <c>name.fvecs</c> (distances) beside it.</summary>
    Vecs,

    /// <summary><c>name.npy</c> (ids, int64, queries × k) and <c>name.distances.npy</c> (float32).</summary>
    Npy,

    /// <summary>One line per hit: <c>query,rank,id,distance</c>, with a header line.</summary>
    Csv,

    /// <summary>One JSON object per query: <c>{"query":q,"ids":[…],"distances":[…]}</c>.</summary>
    JsonLines,
}

/// <summary>
/// Writes search results row by row to temporary files beside the final names and renames them only when every row
/// is written, so an interrupted or failed run leaves nothing under a final name. Rows missing hits (a filter that
/// passes fewer than k items) are padded with id −1 and distance +∞.
/// </summary>
/// <remarks>Not thread-safe: one writer per output, fed in query order.</remarks>
internal sealed class NeighborWriter : IDisposable
{
    private const int NpyHeaderBytes = 128;
    private readonly List<(string Temporary, string Final)> _files = [];
    private readonly ResultFormat _format;
    private readonly int _k;
    private readonly long _firstQuery;
    private readonly FileStream _ids;
    private readonly FileStream? _distances;
    private readonly StreamWriter? _text;
    private readonly byte[] _row;
    private bool _done;

    private NeighborWriter(ResultFormat format, string path, int k, long firstQuery)
    {
        _format = format;
        _k = k;
        _firstQuery = firstQuery;
        _row = new byte[4 + (k * 8)];
        string full = Path.GetFullPath(path);
        try
        {
            switch (format)
            {
                case ResultFormat.Vecs:
                    _ids = Open(full);
                    _distances = Open(Path.ChangeExtension(full, ".fvecs"));
                    break;
                case ResultFormat.Npy:
                    _ids = Open(full);
                    _distances = Open(Path.ChangeExtension(full, ".distances.npy"));
                    _ids.Write(new byte[NpyHeaderBytes]);
                    _distances.Write(new byte[NpyHeaderBytes]);
                    break;
                default:
                    _ids = Open(full);
                    _text = new StreamWriter(_ids, new UTF8Encoding(false), 1 << 16);
                    if (format == ResultFormat.Csv)
                    {
                        _text.WriteLine("query,rank,id,distance");
                    }

                    break;
            }
        }
        catch
        {
            DeleteTemporaries();
            throw;
        }
    }

    /// <summary>The final names this writer produces, in order.</summary>
    public IReadOnlyList<string> FinalPaths => _files.ConvertAll(f => f.Final);

    public long RowsWritten { get; private set; }

    public static ResultFormat Detect(string path, string? given)
    {
        string format = given ?? Path.GetExtension(path).ToLowerInvariant() switch
        {
            ".ivecs" => "ivecs",
            ".npy" => "npy",
            ".csv" => "csv",
            ".jsonl" or ".ndjson" => "jsonl",
            _ => throw new UsageException($"cannot tell the result format from '{path}'; name it .ivecs, .npy, .csv or .jsonl, or give --output-format"),
        };
        return format switch
        {
            "ivecs" => ResultFormat.Vecs,
            "npy" => ResultFormat.Npy,
            "csv" => ResultFormat.Csv,
            "jsonl" => ResultFormat.JsonLines,
            _ => throw new UsageException($"--output-format is '{format}'; expected ivecs, npy, csv or jsonl"),
        };
    }

    /// <summary>Creates the temporary files; fails with <see cref="OutputFileException"/> when the folder is missing or not writable.</summary>
    public static NeighborWriter Create(ResultFormat format, string path, int k, long firstQuery) => new(format, path, k, firstQuery);

    /// <summary>Appends one batch of results (query numbers continue from the previous batch).</summary>
    public void Write(BatchSearchResults results)
    {
        for (int q = 0; q < results.QueryCount; q++)
        {
            ReadOnlySpan<SearchHit> hits = results[q];
            long query = _firstQuery + RowsWritten;
            switch (_format)
            {
                case ResultFormat.Vecs:
                    WriteVecsRow(hits);
                    break;
                case ResultFormat.Npy:
                    WriteNpyRow(hits);
                    break;
                case ResultFormat.Csv:
                    for (int r = 0; r < hits.Length; r++)
                    {
                        _text!.Write(string.Create(CultureInfo.InvariantCulture, $"{query},{r + 1},{hits[r].Id},{hits[r].Distance:R}\n"));
                    }

                    break;
                default:
                    WriteJsonRow(query, hits);
                    break;
            }

            RowsWritten++;
        }
    }

    /// <summary>Flushes everything to disk and renames the temporary files to their final names.</summary>
    public void Complete() => Finish(suffix: "");

    /// <summary>
    /// Keeps the rows written so far under the final names plus <c>.partial</c> (when there are any), so a stopped run
    /// can be continued with <c>--first-query</c> into another file; never under the final names themselves.
    /// </summary>
    public IReadOnlyList<string> KeepPartial()
    {
        if (RowsWritten == 0)
        {
            Dispose();
            return [];
        }

        Finish(suffix: ".partial");
        return _files.ConvertAll(f => f.Final + ".partial");
    }

    public void Dispose()
    {
        if (!_done)
        {
            _done = true;
            CloseStreams();
            DeleteTemporaries();
        }
    }

    private void Finish(string suffix)
    {
        try
        {
            _text?.Flush();
            if (_format == ResultFormat.Npy)
            {
                WriteNpyHeader(_ids, "<i8");
                WriteNpyHeader(_distances!, "<f4");
            }

            _ids.Flush(flushToDisk: true);
            _distances?.Flush(flushToDisk: true);
            CloseStreams();
            foreach ((string temporary, string final) in _files)
            {
                File.Move(temporary, final + suffix, overwrite: true);
            }

            _done = true;
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            Dispose();
            throw new OutputFileException(_files[0].Final, e.Message, e);
        }
    }

    private void WriteVecsRow(ReadOnlySpan<SearchHit> hits)
    {
        Span<byte> row = _row.AsSpan(0, 4 + (_k * 4));
        BinaryPrimitives.WriteInt32LittleEndian(row, _k);
        for (int j = 0; j < _k; j++)
        {
            long id = j < hits.Length ? hits[j].Id : -1;
            if (id is > int.MaxValue or < int.MinValue)
            {
                throw new UsageException($"id {id} does not fit the 32-bit ids of .ivecs; write .npy, .csv or .jsonl instead");
            }

            BinaryPrimitives.WriteInt32LittleEndian(row[(4 + (j * 4))..], (int)id);
        }

        Append(_ids, row);
        for (int j = 0; j < _k; j++)
        {
            BinaryPrimitives.WriteSingleLittleEndian(row[(4 + (j * 4))..], j < hits.Length ? hits[j].Distance : float.PositiveInfinity);
        }

        Append(_distances!, row);
    }

    private void WriteNpyRow(ReadOnlySpan<SearchHit> hits)
    {
        Span<byte> ids = _row.AsSpan(0, _k * 8);
        for (int j = 0; j < _k; j++)
        {
            BinaryPrimitives.WriteInt64LittleEndian(ids[(j * 8)..], j < hits.Length ? hits[j].Id : -1);
        }

        Append(_ids, ids);
        Span<byte> distances = _row.AsSpan(0, _k * 4);
        for (int j = 0; j < _k; j++)
        {
            BinaryPrimitives.WriteSingleLittleEndian(distances[(j * 4)..], j < hits.Length ? hits[j].Distance : float.PositiveInfinity);
        }

        Append(_distances!, distances);
    }

    private void WriteJsonRow(long query, ReadOnlySpan<SearchHit> hits)
    {
        var line = new StringBuilder(32 + (hits.Length * 24));
        line.Append(CultureInfo.InvariantCulture, $"{{\"query\":{query},\"ids\":[");
        for (int j = 0; j < hits.Length; j++)
        {
            line.Append(CultureInfo.InvariantCulture, $"{(j > 0 ? "," : "")}{hits[j].Id}");
        }

        line.Append("],\"distances\":[");
        for (int j = 0; j < hits.Length; j++)
        {
            // JSON has no infinities or NaN; distances of stored finite vectors are finite.
            line.Append(CultureInfo.InvariantCulture, $"{(j > 0 ? "," : "")}{hits[j].Distance:R}");
        }

        line.Append("]}\n");
        _text!.Write(line);
    }

    private void WriteNpyHeader(FileStream stream, string dtype)
    {
        // Fixed 128-byte header (magic, version 1.0, length, dict padded with spaces, newline) so it can be written last.
        string dict = $"{{'descr': '{dtype}', 'fortran_order': False, 'shape': ({RowsWritten}, {_k}), }}";
        byte[] header = new byte[NpyHeaderBytes];
        header.AsSpan().Fill((byte)' ');
        "\x93NUMPY"u8.CopyTo(header);
        header[6] = 1;
        header[7] = 0;
        BinaryPrimitives.WriteUInt16LittleEndian(header.AsSpan(8), NpyHeaderBytes - 10);
        Encoding.ASCII.GetBytes(dict).CopyTo(header, 10);
        header[^1] = (byte)'\n';
        stream.Position = 0;
        stream.Write(header);
        stream.Seek(0, SeekOrigin.End);
    }

    private void Append(FileStream stream, ReadOnlySpan<byte> bytes)
    {
        try
        {
            stream.Write(bytes);
        }
        catch (IOException e)
        {
            throw new OutputFileException(_files[0].Final, e.Message, e);
        }
    }

    private FileStream Open(string final)
    {
        string folder = Path.GetDirectoryName(final) ?? ".";
        string temporary = Path.Combine(folder, $".{Path.GetFileName(final)}.{Guid.NewGuid():N}.tmp");
        try
        {
            var stream = new FileStream(temporary, FileMode.CreateNew, FileAccess.Write, FileShare.None, 1 << 16);
            _files.Add((temporary, final));
            return stream;
        }
        catch (DirectoryNotFoundException e)
        {
            throw new OutputFileException(final, $"its folder '{folder}' does not exist", e);
        }
        catch (UnauthorizedAccessException e)
        {
            throw new OutputFileException(final, $"permission denied in '{folder}'", e);
        }
        catch (IOException e)
        {
            throw new OutputFileException(final, e.Message, e);
        }
    }

    private void CloseStreams()
    {
        try
        {
            _text?.Dispose();
        }
        catch (IOException)
        {
            // The data is discarded anyway; the temporary file is deleted next.
        }

        _ids?.Dispose();
        _distances?.Dispose();
    }

    private void DeleteTemporaries()
    {
        foreach ((string temporary, _) in _files)
        {
            try
            {
                File.Delete(temporary);
            }
            catch (IOException)
            {
            }
            catch (UnauthorizedAccessException)
            {
            }
        }
    }
}

using System.Buffers.Binary;
using System.IO.MemoryMappedFiles;
using System.Runtime.InteropServices;
using Microsoft.Win32.SafeHandles;
using VectorKit.Indexes;
using VectorKit.Internal;

namespace VectorKit.IO;

/// <summary>
/// Full float32 vectors read one row at a time from a file on disk, for exact re-scoring without holding the vectors
/// in memory: a .npy file (little-endian <c>&lt;f4</c>, C order, two dimensions), a .fvecs file, a .bvecs file (bytes
/// converted to float32 as read), or raw row-major float32 of a given dimension. Row <c>r</c> holds the vector of id <c>r</c>, or of <c>rowIds[r]</c> when the
/// caller passes ids.
/// </summary>
/// <remarks>
/// <para><b>Reads.</b> Each <see cref="TryGetVector"/> is one positional read (<see cref="RandomAccess.Read(SafeFileHandle, Span{byte}, long)"/>)
/// straight into the caller's span (for .fvecs into a per-thread buffer, so the row's dimension prefix is checked, then
/// copied). There is no shared stream position, no lock and no allocation on the read path. The operating system's page cache does the
/// caching: a file that fits in free memory is read from RAM after the first touch. Opened with
/// <see cref="FileVectorReads.Mapped"/>, a read is a copy from a read-only mapping of the file instead (no system call;
/// the file must not shrink while the source is open).</para>
/// <para><b>Checks.</b> Opening parses and checks the header with the same rules as <see cref="NpyReader"/> and
/// <see cref="VecsReader"/> (sizes against <see cref="DataReadLimits"/> and against the file length, before anything
/// is allocated). Under positional reads, a file that shrinks afterwards makes a read throw <see cref="DataFormatException"/> naming the
/// offset. Values are not checked for finiteness on read: the file must hold the vectors that were added to the
/// index that reads from it.</para>
/// <para><b>Thread safety.</b> <see cref="TryGetVector"/> is thread-safe and may run on any number of threads at once.
/// Dispose only when no read is running; a read that races with <see cref="Dispose"/> throws
/// <see cref="ObjectDisposedException"/>.</para>
/// </remarks>
public sealed class FileVectorSource : IFullVectorSource, IDisposable
{
    private readonly SafeFileHandle _handle;
    private readonly long _dataStart;
    private readonly long _rowStride;
    private readonly bool _prefixed;
    private readonly bool _byteValues;
    private readonly string _format;
    private readonly Dictionary<long, int>? _rowOf;
    private volatile bool _disposed;
    private MappedRows? _mapped;

    // A .fvecs row with its prefix, per thread (grown to the widest row seen), so a read allocates nothing.
    [ThreadStatic]
    private static byte[]? t_prefixedRow;

    private FileVectorSource(SafeFileHandle handle, string path, string format, long dataStart, long count, int dimension, bool prefixed, long[]? rowIds, bool byteValues = false)
    {
        _byteValues = byteValues;
        _handle = handle;
        FilePath = path;
        _format = format;
        _dataStart = dataStart;
        Count = count;
        Dimension = dimension;
        _prefixed = prefixed;
        _rowStride = (prefixed ? sizeof(int) : 0) + ((long)dimension * (byteValues ? sizeof(byte) : sizeof(float)));
        if (rowIds is not null)
        {
            if (rowIds.Length != count)
            {
                DataFormatThrow.Argument(nameof(rowIds), $"rowIds has {rowIds.Length} ids, but the file '{path}' holds {count} rows; pass one id per row.");
            }

            _rowOf = new Dictionary<long, int>(rowIds.Length, KeyedIdComparer.Instance);
            for (int r = 0; r < rowIds.Length; r++)
            {
                if (!_rowOf.TryAdd(rowIds[r], r))
                {
                    DataFormatThrow.Argument(nameof(rowIds), $"id {rowIds[r]} is given to rows {_rowOf[rowIds[r]]} and {r}; ids must be unique.");
                }
            }
        }
    }

    /// <inheritdoc/>
    public int Dimension { get; }

    /// <summary>The number of rows in the file.</summary>
    public long Count { get; }

    /// <summary>The path the source was opened from.</summary>
    public string FilePath { get; }

    /// <summary>Opens a .npy file of shape (rows, dimension), dtype little-endian float32 (<c>&lt;f4</c>), C order.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="rowIds">Optional: the id of each row (one per row, unique). <see langword="null"/>: a row's number is its id.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <param name="reads">Positional reads (the default) or a read-only mapping of the file; see <see cref="FileVectorReads"/>.</param>
    /// <returns>A source that owns the file handle.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="reads"/> is not a defined <see cref="FileVectorReads"/>.</exception>
    /// <exception cref="ArgumentException"><paramref name="rowIds"/> does not hold one unique id per row.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">
    /// The header is malformed, the dtype is not <c>&lt;f4</c>, the shape is not two-dimensional, a size exceeds a limit,
    /// or the file is shorter than the shape requires.
    /// </exception>
    public static FileVectorSource OpenNpy(string path, long[]? rowIds = null, DataReadLimits? limits = null, FileVectorReads reads = FileVectorReads.Positional)
        => DataFiles.Named(path, () => OpenNpyCore(path, rowIds, limits, CheckReads(reads)));

    private static FileVectorSource OpenNpyCore(string path, long[]? rowIds, DataReadLimits? limits, FileVectorReads reads)
    {
        long dataStart;
        long count;
        int dimension;
        long length;
        using (NpyReader reader = NpyReader.Open(path, limits))
        {
            if (reader.DataType != "<f4")
            {
                DataFormatThrow.Malformed("npy", $"dtype '{reader.DataType}' cannot be read in place; expected little-endian float32 '<f4' (convert the array with astype('<f4'))");
            }

            if (reader.Shape.Count != 2)
            {
                DataFormatThrow.Malformed("npy", $"the shape has {reader.Shape.Count} dimensions; expected (rows, dimension)");
            }

            dataStart = reader.DataStart;
            count = reader.Count;
            dimension = reader.Dimension;
            length = LengthOf(path);
        }

        return Open(path, "npy", dataStart, count, dimension, prefixed: false, rowIds, length, reads);
    }

    /// <summary>Opens a .fvecs file: each row a little-endian int32 dimension, then that many float32 values.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="rowIds">Optional: the id of each row (one per row, unique). <see langword="null"/>: a row's number is its id.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <param name="reads">Positional reads (the default) or a read-only mapping of the file; see <see cref="FileVectorReads"/>.</param>
    /// <returns>A source that owns the file handle.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="reads"/> is not a defined <see cref="FileVectorReads"/>.</exception>
    /// <exception cref="ArgumentException"><paramref name="rowIds"/> does not hold one unique id per row.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">
    /// The file is empty, its first dimension is out of range, or its length is not a whole number of rows of that
    /// dimension (a truncated or ragged file). Each row's own dimension prefix is checked when the row is read.
    /// </exception>
    public static FileVectorSource OpenFvecs(string path, long[]? rowIds = null, DataReadLimits? limits = null, FileVectorReads reads = FileVectorReads.Positional)
        => DataFiles.Named(path, () => OpenVecsCore(path, VecsElementType.Float32, "fvecs", sizeof(float), rowIds, limits, CheckReads(reads)));

    private static FileVectorSource OpenVecsCore(string path, VecsElementType elementType, string format, int elementBytes, long[]? rowIds, DataReadLimits? limits, FileVectorReads reads)
    {
        long count;
        int dimension;
        long length;
        using (VecsReader reader = VecsReader.Open(path, elementType, limits))
        {
            dimension = reader.Dimension;
            count = reader.Count;
            length = LengthOf(path);
        }

        if (dimension == 0)
        {
            DataFormatThrow.Malformed(format, $"the file '{path}' is empty, so it states no dimension and holds no vectors");
        }

        long rowBytes = sizeof(int) + ((long)dimension * elementBytes);
        if (count < 0)
        {
            DataFormatThrow.Malformed(
                format,
                $"the file holds {length} bytes, not a whole number of {rowBytes}-byte rows of dimension {dimension}; it is truncated or its rows differ in dimension",
                length / rowBytes * rowBytes);
        }

        return Open(path, format, 0, count, dimension, prefixed: true, rowIds, length, reads, byteValues: elementBytes == sizeof(byte));
    }

    /// <summary>Opens a .bvecs file: each row a little-endian int32 dimension, then that many unsigned bytes, read as float32 values 0 to 255.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="rowIds">Optional: the id of each row (one per row, unique). <see langword="null"/>: a row's number is its id.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <param name="reads">Positional reads (the default) or a read-only mapping of the file; see <see cref="FileVectorReads"/>.</param>
    /// <returns>A source that owns the file handle.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="reads"/> is not a defined <see cref="FileVectorReads"/>.</exception>
    /// <exception cref="ArgumentException"><paramref name="rowIds"/> does not hold one unique id per row.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">
    /// The file is empty, its first dimension is out of range, or its length is not a whole number of rows of that
    /// dimension (a truncated or ragged file). Each row's own dimension prefix is checked when the row is read.
    /// </exception>
    public static FileVectorSource OpenBvecs(string path, long[]? rowIds = null, DataReadLimits? limits = null, FileVectorReads reads = FileVectorReads.Positional)
        => DataFiles.Named(path, () => OpenVecsCore(path, VecsElementType.UInt8, "bvecs", sizeof(byte), rowIds, limits, CheckReads(reads)));

    /// <summary>Opens a file of raw row-major little-endian float32 values with no header.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="dimension">Components per row, at least 1.</param>
    /// <param name="rowIds">Optional: the id of each row (one per row, unique). <see langword="null"/>: a row's number is its id.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <param name="reads">Positional reads (the default) or a read-only mapping of the file; see <see cref="FileVectorReads"/>.</param>
    /// <returns>A source that owns the file handle.</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is less than 1 or above the limit's maximum dimension.</exception>
    /// <exception cref="ArgumentException"><paramref name="rowIds"/> does not hold one unique id per row.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">The file length is not a whole number of rows, or the row count exceeds the limit.</exception>
    public static FileVectorSource OpenRaw(string path, int dimension, long[]? rowIds = null, DataReadLimits? limits = null, FileVectorReads reads = FileVectorReads.Positional)
        => DataFiles.Named(path, () => OpenRawCore(path, dimension, rowIds, limits, CheckReads(reads)));

    private static FileVectorSource OpenRawCore(string path, int dimension, long[]? rowIds, DataReadLimits? limits, FileVectorReads reads)
    {
        limits ??= DataReadLimits.Default;
        if (dimension < 1 || dimension > limits.MaxDimension)
        {
            DataFormatThrow.ArgumentOutOfRange(nameof(dimension), dimension, $"must be in [1, {limits.MaxDimension}]");
        }

        if (path is null)
        {
            DataFormatThrow.ArgumentNull(nameof(path));
        }

        long length = LengthOf(path);
        long rowBytes = (long)dimension * sizeof(float);
        if (length % rowBytes != 0)
        {
            DataFormatThrow.Malformed(
                "raw float32",
                $"the file holds {length} bytes, not a whole number of {rowBytes}-byte rows of dimension {dimension}; it is truncated or the dimension is wrong",
                length / rowBytes * rowBytes);
        }

        long count = length / rowBytes;
        if (count > limits.MaxRows)
        {
            DataFormatThrow.Malformed("raw float32", $"the file holds {count} rows; the limit is {limits.MaxRows}");
        }

        return Open(path, "raw float32", 0, count, dimension, prefixed: false, rowIds, length, reads);
    }

    /// <summary>Copies the vector of <paramref name="id"/> from the file into <paramref name="destination"/>.</summary>
    /// <param name="id">An id: a row number, or one of the ids given at opening.</param>
    /// <param name="destination">Receives <see cref="Dimension"/> components.</param>
    /// <returns><see langword="false"/> when the file has no row for the id (nothing is written).</returns>
    /// <exception cref="ArgumentException"><paramref name="destination"/> is shorter than <see cref="Dimension"/>.</exception>
    /// <exception cref="DataFormatException">The file ended before the row (it shrank after opening), or a .fvecs row's prefix is not the file's dimension; the message names the row and byte offset.</exception>
    /// <exception cref="ObjectDisposedException">The source was disposed.</exception>
    public bool TryGetVector(long id, Span<float> destination)
    {
        int d = Dimension;
        if (destination.Length < d)
        {
            DataFormatThrow.Argument(nameof(destination), $"destination has {destination.Length} elements; the file's dimension is {d}.");
        }

        if (_disposed)
        {
            DataFormatThrow.Disposed(this);
        }

        long row;
        if (_rowOf is null)
        {
            if ((ulong)id >= (ulong)Count)
            {
                return false;
            }

            row = id;
        }
        else if (_rowOf.TryGetValue(id, out int r))
        {
            row = r;
        }
        else
        {
            return false;
        }

        long offset = _dataStart + (row * _rowStride);
        Span<float> values = destination[..d];
        if (_mapped is not null)
        {
            return _mapped.Copy(this, offset, row, values);
        }

        if (_prefixed)
        {
            // Prefix and values in one read (one system call) through this thread's buffer, then one copy.
            int bytes = (int)_rowStride;
            byte[] buffer = t_prefixedRow is { } held && held.Length >= bytes ? held : (t_prefixedRow = new byte[bytes]);
            Span<byte> whole = buffer.AsSpan(0, bytes);
            ReadExactly(whole, offset, row, "row");
            int found = BinaryPrimitives.ReadInt32LittleEndian(whole);
            if (found != d)
            {
                DataFormatThrow.RaggedRow(_format, row, d, found, offset);
            }

            if (_byteValues)
            {
                ReadOnlySpan<byte> bytesOfRow = whole[sizeof(int)..];
                for (int i = 0; i < d; i++)
                {
                    values[i] = bytesOfRow[i];
                }

                return true; // bytes have no byte order
            }

            whole[sizeof(int)..].CopyTo(MemoryMarshal.AsBytes(values));
        }
        else
        {
            ReadExactly(MemoryMarshal.AsBytes(values), offset, row, "the values of row");
        }

        if (!BitConverter.IsLittleEndian)
        {
            Span<int> raw = MemoryMarshal.Cast<float, int>(values);
            BinaryPrimitives.ReverseEndianness(raw, raw);
        }

        return true;
    }

    /// <summary>Closes the file.</summary>
    public void Dispose()
    {
        _disposed = true;
        _mapped?.Dispose();
        _handle.Dispose();
    }

    /// <summary>Whether rows are copied from a read-only mapping of the file rather than read with positional reads.</summary>
    public bool IsMapped => _mapped is not null;

    // The length of the file a path names, through any symbolic links (FileInfo.Length is the link's own size), as the
    // handle opened for reading later sees it.
    private static long LengthOf(string path)
    {
        using SafeFileHandle handle = File.OpenHandle(path, FileMode.Open, FileAccess.Read, FileShare.ReadWrite);
        return RandomAccess.GetLength(handle);
    }

    private static FileVectorReads CheckReads(FileVectorReads reads)
    {
        if (reads is not (FileVectorReads.Positional or FileVectorReads.Mapped))
        {
            DataFormatThrow.ArgumentOutOfRange(nameof(reads), reads, "must be Positional or Mapped");
        }

        return reads;
    }

    private static FileVectorSource Open(string path, string format, long dataStart, long count, int dimension, bool prefixed, long[]? rowIds, long checkedLength, FileVectorReads reads, bool byteValues = false)
    {
        SafeFileHandle handle = File.OpenHandle(path, FileMode.Open, FileAccess.Read, FileShare.Read, FileOptions.RandomAccess);
        MappedRows? mapped = null;
        try
        {
            // The header was checked on a separate open; a file replaced in between must not be trusted.
            long length = RandomAccess.GetLength(handle);
            if (length != checkedLength)
            {
                DataFormatThrow.Malformed(format, $"the file '{path}' changed length from {checkedLength} to {length} bytes while it was being opened");
            }

            // An empty file has no rows to read and cannot be mapped.
            if (reads == FileVectorReads.Mapped && length > 0)
            {
                mapped = new MappedRows(handle, length);
            }

            return new FileVectorSource(handle, path, format, dataStart, count, dimension, prefixed, rowIds, byteValues) { _mapped = mapped };
        }
        catch
        {
            mapped?.Dispose();
            handle.Dispose();
            throw;
        }
    }

    // A row's bytes (with its prefix when the format has one) into float32 values: the checks of the positional path.
    private bool Decode(ReadOnlySpan<byte> whole, long row, long offset, Span<float> values)
    {
        int d = Dimension;
        if (_prefixed)
        {
            int found = BinaryPrimitives.ReadInt32LittleEndian(whole);
            if (found != d)
            {
                DataFormatThrow.RaggedRow(_format, row, d, found, offset);
            }

            whole = whole[sizeof(int)..];
        }

        if (_byteValues)
        {
            for (int i = 0; i < d; i++)
            {
                values[i] = whole[i];
            }

            return true;
        }

        whole[..(d * sizeof(float))].CopyTo(MemoryMarshal.AsBytes(values));
        if (!BitConverter.IsLittleEndian)
        {
            Span<int> raw = MemoryMarshal.Cast<float, int>(values);
            BinaryPrimitives.ReverseEndianness(raw, raw);
        }

        return true;
    }

    /// <summary>
    /// A read-only view of the whole file. Each copy holds a reference on the view's handle, so a concurrent
    /// <see cref="Dispose"/> unmaps only after the copies in flight end, and a copy after it throws instead of touching
    /// unmapped memory.
    /// </summary>
    private sealed unsafe class MappedRows : IDisposable
    {
        private readonly MemoryMappedFile _file;
        private readonly MemoryMappedViewAccessor _view;
        private readonly byte* _start;
        private readonly long _length;

        public MappedRows(SafeFileHandle handle, long length)
        {
            _file = MemoryMappedFile.CreateFromFile(handle, null, 0, MemoryMappedFileAccess.Read, HandleInheritability.None, leaveOpen: true);
            try
            {
                _view = _file.CreateViewAccessor(0, 0, MemoryMappedFileAccess.Read);
                byte* pointer = null;
                _view.SafeMemoryMappedViewHandle.AcquirePointer(ref pointer);
                _start = pointer + _view.PointerOffset;
                _length = length;
            }
            catch
            {
                _view?.Dispose();
                _file.Dispose();
                throw;
            }
        }

        public bool Copy(FileVectorSource source, long offset, long row, Span<float> values)
        {
            SafeMemoryMappedViewHandle handle = _view.SafeMemoryMappedViewHandle;
            bool added = false;
            try
            {
                handle.DangerousAddRef(ref added);
            }
            catch (ObjectDisposedException)
            {
                DataFormatThrow.Disposed(source);
            }

            try
            {
                // The header's checks put every row inside the length the file had when it was mapped.
                int bytes = (int)source._rowStride;
                if (offset < 0 || offset > _length - bytes)
                {
                    DataFormatThrow.Truncated(source._format, $"row {row} in '{source.FilePath}'", offset, bytes, 0);
                }

                return source.Decode(new ReadOnlySpan<byte>(_start + offset, bytes), row, offset, values);
            }
            finally
            {
                if (added)
                {
                    handle.DangerousRelease();
                }
            }
        }

        public void Dispose()
        {
            _view.SafeMemoryMappedViewHandle.ReleasePointer();
            _view.Dispose();
            _file.Dispose();
        }
    }

    private void ReadExactly(Span<byte> buffer, long offset, long row, string what)
    {
        int done = 0;
        while (done < buffer.Length)
        {
            // A regular file returns fewer bytes only at its end; 0 means the file is now shorter than at opening.
            int got = RandomAccess.Read(_handle, buffer[done..], offset + done);
            if (got == 0)
            {
                DataFormatThrow.Truncated(_format, $"{what} {row} in '{FilePath}'", offset, buffer.Length, done);
            }

            done += got;
        }
    }
}

using System.Buffers.Binary;
using System.Text;

namespace VectorKit.IO;

/// <summary>
/// Streams the rows of a NumPy .npy file (format versions 1.0, 2.0 and 3.0).
/// </summary>
/// <remarks>
/// <para>
/// Layout: the magic bytes <c>\x93NUMPY</c>, a major and a minor version byte, the header length (little-endian
/// uint16 in version 1, uint32 in versions 2 and 3), then the header: a Python dictionary literal with
/// 'descr', 'fortran_order' and 'shape'. The data follows the header. Writers pad the header so the data starts
/// at a multiple of 64 bytes (16 for older writers); this reader accepts any padding.
/// </para>
/// <para>
/// Supported dtypes: <c>f4</c>, <c>f8</c>, <c>i1</c>, <c>u1</c>, <c>i2</c>, <c>i4</c>, <c>i8</c> in little-endian
/// (<c>&lt;</c>), big-endian (<c>&gt;</c>) or not-applicable (<c>|</c>, one-byte types only) order; big-endian data
/// is converted. Native order (<c>=</c>) is rejected because it does not say which machine wrote the file.
/// Only C (row-major) order is supported; a header with <c>'fortran_order': True</c> is rejected. Unknown header
/// keys are rejected.
/// </para>
/// <para>
/// Shape (n, d) reads as n vectors of dimension d. A 1-D shape (n,) reads as n rows of dimension 1, so a single
/// saved vector is the whole <see cref="RowSet{T}.Data"/>. Higher ranks (n, a, b, ...) read as n rows of dimension
/// a × b × .... A 0-D (scalar) array is rejected.
/// </para>
/// </remarks>
public sealed class NpyReader : VectorReader
{
    private const string Format = "npy";

    // Real headers are a few hundred bytes; the cap stops a version-2 header length from driving a huge allocation.
    private const int MaxHeaderBytes = 1 << 20;

    private readonly long[] _shape;

    /// <summary>The six magic bytes: 0x93 then ASCII "NUMPY" (not UTF-8 text: 0x93 is a raw byte).</summary>
    internal static ReadOnlySpan<byte> Magic => [0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y'];

    /// <summary>Starts reading a .npy stream and parses its header.</summary>
    /// <param name="stream">The stream, positioned at the magic bytes.</param>
    /// <param name="leaveOpen">Whether to leave <paramref name="stream"/> open when the reader is disposed.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <exception cref="ArgumentNullException"><paramref name="stream"/> is <see langword="null"/>.</exception>
    /// <exception cref="ArgumentException"><paramref name="stream"/> cannot be read.</exception>
    /// <exception cref="DataFormatException">
    /// The magic, version or header is malformed, the dtype or order is unsupported, the shape exceeds a limit, or
    /// the data is shorter than the shape requires.
    /// </exception>
    public NpyReader(Stream stream, bool leaveOpen = false, DataReadLimits? limits = null)
        : base(stream, leaveOpen, Format, limits)
    {
        Span<byte> preamble = stackalloc byte[10];
        ReadHeader(preamble[..8], "the magic and version");
        if (!preamble[..6].SequenceEqual(Magic))
        {
            DataFormatThrow.Malformed(Format, $"wrong magic {Convert.ToHexString(preamble[..6])}; expected 934E554D5059 (\\x93NUMPY)", 0);
        }

        int major = preamble[6];
        int minor = preamble[7];
        if (major is < 1 or > 3 || minor != 0)
        {
            DataFormatThrow.Malformed(Format, $"format version {major}.{minor} is not supported; expected 1.0, 2.0 or 3.0", 6);
        }

        long headerLength;
        if (major == 1)
        {
            ReadHeader(preamble.Slice(8, 2), "the header length");
            headerLength = BinaryPrimitives.ReadUInt16LittleEndian(preamble[8..]);
        }
        else
        {
            Span<byte> length = stackalloc byte[4];
            ReadHeader(length, "the header length");
            headerLength = BinaryPrimitives.ReadUInt32LittleEndian(length);
        }

        if (headerLength > MaxHeaderBytes || (RemainingBytes >= 0 && headerLength > RemainingBytes))
        {
            DataFormatThrow.Malformed(
                Format,
                $"header length {headerLength} exceeds {(headerLength > MaxHeaderBytes ? $"the limit of {MaxHeaderBytes} bytes" : $"the {RemainingBytes} bytes that remain")}",
                Offset);
        }

        long headerOffset = Offset;
        byte[] headerBytes = new byte[headerLength];
        ReadHeader(headerBytes, "the header");

        // Versions 1 and 2 store the header as Latin-1, version 3 as UTF-8; valid headers are ASCII either way.
        string header = major == 3 ? Encoding.UTF8.GetString(headerBytes) : Encoding.Latin1.GetString(headerBytes);
        NpyHeaderParser.Parse(header, headerOffset, out string descr, out bool fortranOrder, out long[] shape);

        if (fortranOrder)
        {
            DataFormatThrow.Malformed(
                Format,
                "'fortran_order': True (column-major) arrays are not supported; save the array in C order (row-major)",
                headerOffset);
        }

        (ElementKind kind, bool bigEndian) = ParseDescr(descr, headerOffset);
        if (shape.Length == 0)
        {
            DataFormatThrow.Malformed(Format, "a 0-d (scalar) array holds no vectors; expected shape (n,) or (n, d)", headerOffset);
        }

        long dimension = 1;
        for (int i = 1; i < shape.Length; i++)
        {
            // Saturate instead of overflowing; anything above the cap is rejected by SetLayout.
            dimension = shape[i] > Limits.MaxDimension || dimension > Limits.MaxDimension ? long.MaxValue : checked(dimension * shape[i]);
        }

        _shape = shape;
        DataType = descr;
        FormatVersion = major;
        SetLayout(shape[0], dimension, kind, bigEndian, rowPrefixConsumed: false);
    }

    /// <summary>The array shape from the header.</summary>
    public IReadOnlyList<long> Shape => _shape;

    /// <summary>The dtype string from the header, e.g. <c>&lt;f4</c>.</summary>
    public string DataType { get; }

    /// <summary>The major format version: 1, 2 or 3.</summary>
    public int FormatVersion { get; }

    /// <summary>The byte offset of the first data byte (just after the header), from where the reader started.</summary>
    internal long DataStart => Offset;

    /// <summary>Opens a .npy file for streaming.</summary>
    /// <param name="path">The file path.</param>
    /// <param name="limits">Caps on the dimension and row count; <see langword="null"/> for <see cref="DataReadLimits.Default"/>.</param>
    /// <returns>A reader that owns the file handle; its <see cref="DataFormatException"/>s, here and in later reads, name the file (<see cref="DataFormatException.FilePath"/>).</returns>
    /// <exception cref="ArgumentNullException"><paramref name="path"/> is <see langword="null"/>.</exception>
    /// <exception cref="IOException">The file cannot be opened.</exception>
    /// <exception cref="DataFormatException">The header is malformed or unsupported, or the data is too short.</exception>
    public static NpyReader Open(string path, DataReadLimits? limits = null)
    {
        FileStream stream = DataFiles.OpenRead(path);
        try
        {
            return new NpyReader(stream, leaveOpen: false, limits) { SourcePath = stream.Name };
        }
        catch (DataFormatException e) when (DataFiles.NameFile(e, stream.Name))
        {
            throw; // not reached: the filter names the file and lets the exception pass
        }
        catch
        {
            stream.Dispose();
            throw;
        }
    }

    private static (ElementKind Kind, bool BigEndian) ParseDescr(string descr, long offset)
    {
        if (descr.Length == 3 && descr[0] is '<' or '>' or '|')
        {
            bool bigEndian = descr[0] == '>';
            ElementKind? kind = descr.AsSpan(1) switch
            {
                "f4" => ElementKind.Float32,
                "f8" => ElementKind.Float64,
                "u1" => ElementKind.UInt8,
                "i1" => ElementKind.Int8,
                "i2" => ElementKind.Int16,
                "i4" => ElementKind.Int32,
                "i8" => ElementKind.Int64,
                _ => null,
            };

            // '|' means "byte order not applicable", which only one-byte types may use.
            if (kind is { } k && (descr[0] != '|' || ElementConverter.SizeOf(k) == 1))
            {
                return (k, bigEndian);
            }
        }

        DataFormatThrow.Malformed(
            Format,
            $"dtype '{descr}' is not supported; expected f4, f8, i1, u1, i2, i4 or i8 with '<' or '>' byte order",
            offset);
        return default;
    }
}

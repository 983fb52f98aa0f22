using System.Buffers.Binary;
using System.Text;
using FsCheck;
using FsCheck.Xunit;
using VectorKit.IO;
using Xunit;

namespace VectorKit.Tests.IO;

/// <summary>
/// <see cref="FileVectorSource"/> against the in-memory arrays the files were written from. The files are written
/// here byte by byte from the published layouts (the .npy header as in NEP 1 and numpy's "format" module docs; .fvecs
/// as an int32 dimension before each row; raw as little-endian float32), not with the library's writers, so a shared
/// misunderstanding of a layout cannot hide.
/// </summary>
public sealed class FileVectorSourceTests : IDisposable
{
    private readonly string _directory = Directory.CreateTempSubdirectory("vk-filesource-").FullName;

    public enum Layout
    {
        Npy,
        Fvecs,
        Raw,
    }

    public void Dispose() => Directory.Delete(_directory, recursive: true);

    [Property(MaxTest = 40)]
    public void EveryRow_ReadsBackExactly_ForEveryLayout_WithAndWithoutIds(PositiveInt rowSeed, PositiveInt dimSeed, int seed, bool withIds)
    {
        int rows = 1 + (rowSeed.Get % 60);
        int d = 1 + (dimSeed.Get % 40);
        var random = new Random(seed);
        float[] data = new float[rows * d];
        for (int i = 0; i < data.Length; i++)
        {
            // Arbitrary bit patterns that are finite, including negative zero and subnormals.
            float value;
            do
            {
                value = BitConverter.Int32BitsToSingle(random.Next() ^ (random.Next(2) << 31));
            }
            while (!float.IsFinite(value));
            data[i] = value;
        }

        long[]? ids = withIds ? Enumerable.Range(0, rows).Select(_ => random.NextInt64(long.MinValue, long.MaxValue)).Distinct().ToArray() : null;
        if (ids is not null && ids.Length != rows)
        {
            return; // a collision among random 64-bit ids: not this property's subject
        }

        foreach ((Layout layout, FileVectorReads reads) in LayoutsAndReads())
        {
            using FileVectorSource source = Open(layout, Write(layout, data, d), d, ids, reads);
            Assert.Equal(reads == FileVectorReads.Mapped, source.IsMapped);
            Assert.Equal(d, source.Dimension);
            Assert.Equal(rows, source.Count);
            var row = new float[d + 3];
            for (int r = 0; r < rows; r++)
            {
                Array.Fill(row, 7f);
                Assert.True(source.TryGetVector(ids?[r] ?? r, row));
                Assert.Equal(
                    Bits(data.AsSpan(r * d, d)),
                    Bits(row.AsSpan(0, d)));
                Assert.Equal([7f, 7f, 7f], row[d..]); // nothing written past the dimension
            }

            Array.Fill(row, 7f);
            if (ids is null)
            {
                Assert.False(source.TryGetVector(rows, row));
                Assert.False(source.TryGetVector(-1, row));
            }
            else
            {
                long missing = ids.Max() == long.MaxValue ? ids.Min() - 1 : ids.Max() + 1;
                Assert.False(source.TryGetVector(missing, row));
            }

            Assert.All(row, x => Assert.Equal(7f, x));
        }
    }

    [Fact]
    public void ConcurrentReads_FromSeveralThreads_GetTheirOwnRows()
    {
        const int Rows = 2000, D = 33;
        float[] data = Enumerable.Range(0, Rows * D).Select(i => (float)i).ToArray();
        long[] ids = Enumerable.Range(0, Rows).Select(r => (long)r * 1_000_003).ToArray();
        foreach ((Layout layout, FileVectorReads reads) in LayoutsAndReads())
        {
            using FileVectorSource source = Open(layout, Write(layout, data, D), D, ids, reads);
            int failures = 0;
            Parallel.For(0, 8, new ParallelOptions { MaxDegreeOfParallelism = 8 }, t =>
            {
                var random = new Random(t);
                var row = new float[D];
                for (int i = 0; i < 5000; i++)
                {
                    int r = random.Next(Rows);
                    if (!source.TryGetVector(ids[r], row) || row[0] != r * D || row[D - 1] != (r * D) + D - 1)
                    {
                        Interlocked.Increment(ref failures);
                    }
                }
            });
            Assert.Equal(0, failures);
        }
    }

    [Fact]
    [Trait("CWE", "CWE-20")]
    public void Fvecs_RowWithWrongDimensionPrefix_ThrowsNamingRowAndOffset()
    {
        const int D = 4;
        float[] data = Enumerable.Range(0, 5 * D).Select(i => (float)i).ToArray();
        string path = Write(Layout.Fvecs, data, D);
        byte[] bytes = File.ReadAllBytes(path);
        long offset = 2 * (4 + (4 * D)); // row 2's prefix
        BinaryPrimitives.WriteInt32LittleEndian(bytes.AsSpan((int)offset), D + 1);
        File.WriteAllBytes(path, bytes);

        foreach (FileVectorReads reads in Enum.GetValues<FileVectorReads>())
        {
            using FileVectorSource source = FileVectorSource.OpenFvecs(path, reads: reads);
            var row = new float[D];
            Assert.True(source.TryGetVector(1, row));
            var e = Assert.Throws<DataFormatException>(() => source.TryGetVector(2, row));
            Assert.Contains("row 2 has dimension 5 but row 0 has dimension 4", e.Message, StringComparison.Ordinal);
            Assert.Contains($"at byte offset {offset}", e.Message, StringComparison.Ordinal);
        }
    }

    [Fact]
    [Trait("CWE", "CWE-20")]
    public void TruncatedFiles_AreRejectedAtOpening_WithTheirSizes()
    {
        const int D = 8;
        float[] data = new float[10 * D];
        foreach ((Layout layout, string expected) in new[]
        {
            (Layout.Npy, "the header claims 10 rows of dimension 8 (320 bytes of data) but only 317 bytes remain"),
            (Layout.Fvecs, "not a whole number of 36-byte rows of dimension 8"),
            (Layout.Raw, "not a whole number of 32-byte rows of dimension 8"),
        })
        {
            string path = Write(layout, data, D);
            using (var file = new FileStream(path, FileMode.Open, FileAccess.Write))
            {
                file.SetLength(file.Length - 3);
            }

            var e = Assert.Throws<DataFormatException>(() => Open(layout, path, D, null).Dispose());
            Assert.Contains(expected, e.Message, StringComparison.Ordinal);
        }
    }

    [Fact]
    [Trait("CWE", "CWE-20")]
    public void FileShortenedAfterOpening_ThrowsOnTheMissingRow_NamingTheOffset()
    {
        const int D = 4;
        float[] data = Enumerable.Range(0, 6 * D).Select(i => (float)i).ToArray();
        string path = Write(Layout.Raw, data, D);
        using FileVectorSource source = FileVectorSource.OpenRaw(path, D);
        using (var file = new FileStream(path, FileMode.Open, FileAccess.Write, FileShare.ReadWrite))
        {
            file.SetLength((4 * D * 4) + 6); // rows 0..3 whole, 6 bytes of row 4
        }

        var row = new float[D];
        Assert.True(source.TryGetVector(3, row));
        Assert.Equal([12f, 13f, 14f, 15f], row);
        var e = Assert.Throws<DataFormatException>(() => source.TryGetVector(4, row));
        Assert.Contains("the values of row 4", e.Message, StringComparison.Ordinal);
        Assert.Contains("at byte offset 64: expected 16 bytes, found 6", e.Message, StringComparison.Ordinal);

        // .fvecs reads a row with its prefix: rows of 20 bytes, row 4 at byte 80, 6 of its bytes left.
        string fvecs = Write(Layout.Fvecs, data, D);
        using FileVectorSource prefixed = FileVectorSource.OpenFvecs(fvecs);
        using (var file = new FileStream(fvecs, FileMode.Open, FileAccess.Write, FileShare.ReadWrite))
        {
            file.SetLength((4 * 20) + 6);
        }

        Assert.True(prefixed.TryGetVector(3, row));
        Assert.Equal([12f, 13f, 14f, 15f], row);
        e = Assert.Throws<DataFormatException>(() => prefixed.TryGetVector(4, row));
        Assert.Contains("row 4 in", e.Message, StringComparison.Ordinal);
        Assert.Contains("at byte offset 80: expected 20 bytes, found 6", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("CWE", "CWE-20")]
    public void BadNpyHeaders_AreRejected()
    {
        string WriteNpy(string descr, string shape, int dataBytes, bool fortran = false)
        {
            string path = Path.Combine(_directory, $"h{Guid.NewGuid():N}.npy");
            File.WriteAllBytes(path, Npy(descr, shape, new byte[dataBytes], fortran));
            return path;
        }

        Assert.Contains("dtype '<f8' cannot be read in place", Assert.Throws<DataFormatException>(() => FileVectorSource.OpenNpy(WriteNpy("<f8", "(2, 2)", 32))).Message, StringComparison.Ordinal);
        Assert.Contains("dtype '>f4' cannot be read in place", Assert.Throws<DataFormatException>(() => FileVectorSource.OpenNpy(WriteNpy(">f4", "(2, 2)", 16))).Message, StringComparison.Ordinal);
        Assert.Contains("the shape has 1 dimensions", Assert.Throws<DataFormatException>(() => FileVectorSource.OpenNpy(WriteNpy("<f4", "(4,)", 16))).Message, StringComparison.Ordinal);
        Assert.Contains("fortran_order", Assert.Throws<DataFormatException>(() => FileVectorSource.OpenNpy(WriteNpy("<f4", "(2, 2)", 16, fortran: true))).Message, StringComparison.Ordinal);
        Assert.Contains("the limit is 1", Assert.Throws<DataFormatException>(() => FileVectorSource.OpenNpy(WriteNpy("<f4", "(2, 2)", 16), limits: new DataReadLimits { MaxRows = 1 })).Message, StringComparison.Ordinal);

        string bad = Path.Combine(_directory, "magic.npy");
        byte[] bytes = Npy("<f4", "(1, 1)", new byte[4], false);
        bytes[1] = (byte)'X';
        File.WriteAllBytes(bad, bytes);
        Assert.Contains("wrong magic", Assert.Throws<DataFormatException>(() => FileVectorSource.OpenNpy(bad)).Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Arguments_AreChecked()
    {
        const int D = 3;
        float[] data = new float[4 * D];
        string path = Write(Layout.Raw, data, D);
        Assert.Contains("rowIds has 3 ids, but the file", Assert.Throws<ArgumentException>(() => FileVectorSource.OpenRaw(path, D, [1, 2, 3])).Message, StringComparison.Ordinal);
        Assert.Contains("id 5 is given to rows 1 and 3", Assert.Throws<ArgumentException>(() => FileVectorSource.OpenRaw(path, D, [1, 5, 2, 5])).Message, StringComparison.Ordinal);
        Assert.Equal("dimension", Assert.Throws<ArgumentOutOfRangeException>(() => FileVectorSource.OpenRaw(path, 0)).ParamName);
        Assert.Throws<FileNotFoundException>(() => FileVectorSource.OpenNpy(Path.Combine(_directory, "missing.npy")));

        string empty = Path.Combine(_directory, "empty.fvecs");
        File.WriteAllBytes(empty, []);
        Assert.Contains("is empty", Assert.Throws<DataFormatException>(() => FileVectorSource.OpenFvecs(empty)).Message, StringComparison.Ordinal);

        Assert.Equal("reads", Assert.Throws<ArgumentOutOfRangeException>(() => FileVectorSource.OpenRaw(path, D, reads: (FileVectorReads)2)).ParamName);
        foreach (FileVectorReads reads in Enum.GetValues<FileVectorReads>())
        {
            var source = FileVectorSource.OpenRaw(path, D, reads: reads);
            Assert.Equal("destination", Assert.Throws<ArgumentException>(() => source.TryGetVector(0, new float[D - 1])).ParamName);
            source.Dispose();
            Assert.Throws<ObjectDisposedException>(() => source.TryGetVector(0, new float[D]));
        }
    }

    [Fact]
    public void SymbolicLinkToTheFile_OpensAndReadsTheTarget_ForEveryLayout()
    {
        // Regression: the length checked at opening was the link's own size, so every linked data file was refused
        // as "changed length". Creating links needs no privilege on Linux and macOS, where CI runs.
        if (OperatingSystem.IsWindows())
        {
            return;
        }

        const int D = 5;
        float[] data = Enumerable.Range(0, 7 * D).Select(i => i * 0.5f).ToArray();
        foreach ((Layout layout, FileVectorReads reads) in LayoutsAndReads())
        {
            string target = Write(layout, data, D);
            string link = Path.Combine(_directory, $"link-{Guid.NewGuid():N}{Path.GetExtension(target)}");
            File.CreateSymbolicLink(link, target);
            using FileVectorSource source = Open(layout, link, D, null, reads);
            Assert.Equal(7, source.Count);
            var row = new float[D];
            Assert.True(source.TryGetVector(6, row));
            Assert.Equal(data.AsSpan(6 * D, D).ToArray(), row);
        }
    }

    [Fact]
    public void Mapped_DisposeWhileOtherThreadsRead_EndsTheirReadsWithObjectDisposed_NeverAWrongRow()
    {
        const int Rows = 500, D = 16;
        float[] data = Enumerable.Range(0, Rows * D).Select(i => (float)i).ToArray();
        var source = FileVectorSource.OpenNpy(Write(Layout.Npy, data, D), reads: FileVectorReads.Mapped);
        int wrong = 0, disposed = 0;
        using var started = new CountdownEvent(4);
        Thread[] readers = [.. Enumerable.Range(0, 4).Select(t => new Thread(() =>
        {
            var random = new Random(t);
            var row = new float[D];
            started.Signal();
            while (true)
            {
                int r = random.Next(Rows);
                try
                {
                    if (!source.TryGetVector(r, row) || row[0] != r * D || row[D - 1] != (r * D) + D - 1)
                    {
                        Interlocked.Increment(ref wrong);
                    }
                }
                catch (ObjectDisposedException)
                {
                    Interlocked.Increment(ref disposed);
                    return;
                }
            }
        }))];
        foreach (Thread reader in readers)
        {
            reader.Start();
        }

        started.Wait();
        Thread.Sleep(20);
        source.Dispose();
        foreach (Thread reader in readers)
        {
            reader.Join();
        }

        Assert.Equal(0, wrong);
        Assert.Equal(4, disposed);
    }

    internal static string WriteFile(string directory, Layout layout, float[] data, int d)
    {
        int rows = data.Length / d;
        string path = Path.Combine(directory, $"{Guid.NewGuid():N}.{layout.ToString().ToLowerInvariant()}");
        byte[] values = new byte[data.Length * 4];
        for (int i = 0; i < data.Length; i++)
        {
            BinaryPrimitives.WriteSingleLittleEndian(values.AsSpan(i * 4), data[i]);
        }

        switch (layout)
        {
            case Layout.Npy:
                File.WriteAllBytes(path, Npy("<f4", $"({rows}, {d})", values, false));
                break;
            case Layout.Raw:
                File.WriteAllBytes(path, values);
                break;
            default:
                using (var file = File.Create(path))
                {
                    Span<byte> prefix = stackalloc byte[4];
                    BinaryPrimitives.WriteInt32LittleEndian(prefix, d);
                    for (int r = 0; r < rows; r++)
                    {
                        file.Write(prefix);
                        file.Write(values.AsSpan(r * d * 4, d * 4));
                    }
                }

                break;
        }

        return path;
    }

    internal static FileVectorSource Open(Layout layout, string path, int d, long[]? ids, FileVectorReads reads = FileVectorReads.Positional) => layout switch
    {
        Layout.Npy => FileVectorSource.OpenNpy(path, ids, reads: reads),
        Layout.Fvecs => FileVectorSource.OpenFvecs(path, ids, reads: reads),
        _ => FileVectorSource.OpenRaw(path, d, ids, reads: reads),
    };

    private static IEnumerable<(Layout, FileVectorReads)> LayoutsAndReads()
        => from layout in Enum.GetValues<Layout>() from reads in Enum.GetValues<FileVectorReads>() select (layout, reads);

    // A version 1.0 file with the header padded so the data starts at byte 64 or 128 (NEP 1).
    private static byte[] Npy(string descr, string shape, byte[] data, bool fortran)
    {
        string dict = $"{{'descr': '{descr}', 'fortran_order': {(fortran ? "True" : "False")}, 'shape': {shape}, }}";
        int total = ((10 + dict.Length + 1 + 63) / 64) * 64;
        int headerLength = total - 10;
        var bytes = new List<byte> { 0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', 1, 0, (byte)(headerLength & 0xFF), (byte)(headerLength >> 8) };
        bytes.AddRange(Encoding.ASCII.GetBytes(dict.PadRight(headerLength - 1) + "\n"));
        bytes.AddRange(data);
        return [.. bytes];
    }

    private static int[] Bits(ReadOnlySpan<float> values)
        => System.Runtime.InteropServices.MemoryMarshal.Cast<float, int>(values).ToArray();

    private string Write(Layout layout, float[] data, int d) => WriteFile(_directory, layout, data, d);
}

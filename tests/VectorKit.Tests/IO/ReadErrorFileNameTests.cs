using VectorKit.IO;

namespace VectorKit.Tests.IO;

/// <summary>
/// The data-set readers that take a path name the file when its content is wrong: the same bytes read from a stream
/// give the same message without the file ("fvecs: ..."); read from a path, "fvecs file '/full/path': ...", with
/// <see cref="DataFormatException.FilePath"/> set.
/// </summary>
public sealed class ReadErrorFileNameTests : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("vk-read-name-").FullName;

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    public static TheoryData<string> Readers => new()
    {
        "fvecs truncated", "ivecs ragged", "npy bad magic", "npy truncated, streaming reader", "csv bad field", "vecs neighbors truncated",
    };

    [Theory]
    [MemberData(nameof(Readers))]
    public void AReadFromAPath_NamesTheFile(string reader)
    {
        (byte[] bytes, Func<Stream, object> fromStream, Func<string, object> fromPath) = Case(reader);
        string path = Path.Combine(_folder, "rentals.dat");
        File.WriteAllBytes(path, bytes);

        var expected = Assert.Throws<DataFormatException>(() => fromStream(new MemoryStream(bytes)));
        Assert.Null(expected.FilePath);
        var e = Assert.Throws<DataFormatException>(() => fromPath(path));
        int colon = expected.Message.IndexOf(": ", StringComparison.Ordinal);
        Assert.Equal($"{expected.Message[..colon]} file '{path}'{expected.Message[colon..]}", e.Message);
        Assert.Equal(path, e.FilePath);

        string relative = Path.GetRelativePath(Environment.CurrentDirectory, path);
        Assert.Equal(path, Assert.Throws<DataFormatException>(() => fromPath(relative)).FilePath);
    }

    [Fact]
    public void AFileVectorSourceOfTheWrongDtype_NamesTheFile()
    {
        string path = Path.Combine(_folder, "ints.npy");
        NpyFile.Write(path, new IntVectorSet([1, 2, 3, 4], 2));
        var e = Assert.Throws<DataFormatException>(() => FileVectorSource.OpenNpy(path).Dispose());
        Assert.StartsWith($"npy file '{path}': dtype '<i4' cannot be read in place", e.Message, StringComparison.Ordinal);
        Assert.Equal(path, e.FilePath);
    }

    private static (byte[] Bytes, Func<Stream, object> FromStream, Func<string, object> FromPath) Case(string reader)
    {
        var vectors = new VectorSet([1f, 2f, 3f, 4f, 5f, 6f], 2);
        switch (reader)
        {
            case "fvecs truncated":
                return (Bytes(s => VecsFile.WriteFvecs(s, vectors))[..^3], s => VecsFile.ReadFvecs(s), p => VecsFile.ReadFvecs(p));
            case "ivecs ragged":
                byte[] ragged = [.. Bytes(s => VecsFile.WriteIvecs(s, new IntVectorSet([1, 2], 2))), .. Bytes(s => VecsFile.WriteIvecs(s, new IntVectorSet([1, 2, 3], 3)))];
                return (ragged, s => VecsFile.ReadIvecs(s), p => VecsFile.ReadIvecs(p));
            case "npy bad magic":
                byte[] npy = Bytes(s => NpyFile.Write(s, vectors));
                npy[1] = (byte)'X';
                return (npy, s => NpyFile.ReadVectors(s), p => NpyFile.ReadVectors(p));
            case "npy truncated, streaming reader":
                return (Bytes(s => NpyFile.Write(s, vectors))[..^2], s => ReadBlock(new NpyReader(s)), p => ReadBlock(NpyReader.Open(p)));
            case "csv bad field":
                byte[] csv = "1,2\n3,rope\n"u8.ToArray();
                return (csv, s => CsvVectors.Read(new StreamReader(s)), p => CsvVectors.Read(p));
            case "vecs neighbors truncated":
                return (Bytes(s => VecsFile.WriteIvecs(s, new IntVectorSet([1, 2, 3, 4], 2)))[..^1], s => VecsFile.ReadNeighbors(s), p => VecsFile.ReadNeighbors(p));
            default:
                throw new ArgumentOutOfRangeException(nameof(reader));
        }
    }

    private static int ReadBlock(VectorReader reader)
    {
        using (reader)
        {
            // The header is sound; the error comes from a later read.
            return reader.ReadBlock(new float[64]);
        }
    }

    private static byte[] Bytes(Action<Stream> write)
    {
        var stream = new MemoryStream();
        write(stream);
        return stream.ToArray();
    }
}

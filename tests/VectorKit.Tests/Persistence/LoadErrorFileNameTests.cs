using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Loading from a path names the file: the same failure read from a stream gives the same exception (message,
/// section, offset, inner exception) without the file; read from a path, the message names the full path and
/// <see cref="IndexFileException.FilePath"/> holds it.
/// </summary>
public sealed class LoadErrorFileNameTests : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("vk-load-name-").FullName;

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    public static TheoryData<string> Damages => new() { "truncated", "flipped byte", "trailing bytes", "not an index" };

    [Theory]
    [MemberData(nameof(Damages))]
    public void ALoadFromAPath_NamesTheFile_AndKeepsTheLocationAndCause(string damage)
    {
        using GraphIndex index = PersistenceSamples.Graph(count: 200);
        byte[] bytes = Damage(IndexFileBytes.Save(index), damage);
        string path = Path.Combine(_folder, "catalogue.vkx");
        File.WriteAllBytes(path, bytes);

        // The stream load of the same bytes is the reference (bytes after the index are an error only for a file).
        IndexFileException? fromStream = damage == "trailing bytes"
            ? null
            : Assert.Throws<IndexFileException>(() => IndexFile.Load(new MemoryStream(bytes)).Dispose());
        Assert.Null(fromStream?.FilePath);

        foreach (Func<IVectorIndex> load in new Func<IVectorIndex>[] { () => IndexFile.Load(path), () => IndexFile.Load<GraphIndex>(path) })
        {
            var fromFile = Assert.Throws<IndexFileException>(() => load().Dispose());
            Assert.Equal(path, fromFile.FilePath);
            Assert.StartsWith($"Index file '{path}' ", fromFile.Message, StringComparison.Ordinal);
            if (fromStream is not null)
            {
                Assert.Equal(fromStream.Message.Replace("Index file ", $"Index file '{path}' ", StringComparison.Ordinal), fromFile.Message);
                Assert.Equal(fromStream.Section, fromFile.Section);
                Assert.Equal(fromStream.Offset, fromFile.Offset);
                Assert.Equal(fromStream.InnerException?.GetType(), fromFile.InnerException?.GetType());
            }
        }
    }

    [Fact]
    public void ALoadOfTheWrongKind_NamesTheFile()
    {
        using ExactIndex index = PersistenceSamples.Exact();
        string path = Path.Combine(_folder, "exact.vkx");
        IndexFile.Save(index, path);
        var e = Assert.Throws<IndexFileException>(() => IndexFile.Load<GraphIndex>(path).Dispose());
        Assert.Equal($"Index file '{path}' holds an ExactIndex; a GraphIndex was requested.", e.Message);
        Assert.Equal("header", e.Section);
        Assert.Equal(path, e.FilePath);
    }

    [Fact]
    public void ARelativePath_IsNamedInFull()
    {
        string path = Path.Combine(_folder, "empty.vkx");
        File.WriteAllBytes(path, []);
        string relative = Path.GetRelativePath(Environment.CurrentDirectory, path);
        var e = Assert.Throws<IndexFileException>(() => IndexFile.Load(relative).Dispose());
        Assert.Equal(path, e.FilePath);
        Assert.StartsWith($"Index file '{path}' ", e.Message, StringComparison.Ordinal);
    }

    private static byte[] Damage(byte[] bytes, string damage) => damage switch
    {
        "truncated" => bytes[..(bytes.Length / 2)],
        "flipped byte" => bytes.Select((b, i) => i == bytes.Length - 20 ? (byte)(b ^ 0x10) : b).ToArray(),
        "trailing bytes" => [.. bytes, 1, 2, 3],
        _ => [.. "not an index at all, just some text"u8],
    };
}

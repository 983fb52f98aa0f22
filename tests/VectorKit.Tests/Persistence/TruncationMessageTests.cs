using VectorKit.Indexes.Graph;
using VectorKit.Persistence;
using VectorKit.Tests.IO;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// A file cut short says that it is truncated, with the length it should have and the length it has, whether the
/// loader sees the length up front (a file, a seekable stream) or finds the end while reading (a stream of unknown length).
/// </summary>
public sealed class TruncationMessageTests : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("vk-truncated-").FullName;

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    [Fact]
    [Trait("Weakness", "CWE-130 length inconsistency")]
    public void AFileCutInsideASection_SaysTruncated_WithTheDeclaredAndTheActualLength_AndTheSection()
    {
        using GraphIndex graph = PersistenceSamples.Graph(count: 300);
        byte[] file = IndexFileBytes.Save(graph);
        foreach (SectionSpan section in IndexFileBytes.Map(file))
        {
            foreach (long cut in new[] { section.FrameStart + 3, section.PayloadStart + (section.Length / 2), section.End - 1 })
            {
                byte[] truncated = file[..(int)cut];

                // Known length: the header's section table is checked against it before any section is read.
                string path = Path.Combine(_folder, "cut.vkx");
                File.WriteAllBytes(path, truncated);
                var known = Assert.Throws<IndexFileException>(() => IndexFile.Load(path).Dispose());
                Assert.Equal(
                    $"Index file '{path}' is truncated: its header declares {file.Length} bytes in all, but the file has only {cut} ({file.Length - cut} missing); it stops in section '{section.Name}' (id {section.Id}), which should end at byte {section.End}.",
                    known.Message);
                Assert.Equal(section.Name, known.Section);
                Assert.Equal(cut, known.Offset);
                Assert.Equal(known.Message.Replace($"'{path}' ", "", StringComparison.Ordinal), Rejection.Assert(truncated).Message);

                // Unknown length: the data runs out while the section is read.
                IndexFileException streamed = Rejection.Assert(truncated, open: bytes => new TrickleStream(bytes, 4093));
                Assert.StartsWith($"Index file is truncated: its header declares {file.Length} bytes in all, but the data stops after {cut}, in '{section.Name}' (id {section.Id}) (", streamed.Message, StringComparison.Ordinal);
                Assert.Equal(section.Name, streamed.Section);
            }
        }
    }

    [Fact]
    [Trait("Weakness", "CWE-130 length inconsistency")]
    public void AFileCutInsideTheHeaderOrTheMagicNumber_SaysTruncated()
    {
        using GraphIndex graph = PersistenceSamples.Graph();
        byte[] file = IndexFileBytes.Save(graph);
        int headerEnd = IndexFileBytes.HeaderEnd(file);
        foreach (int cut in new[] { 10, 16, 40, headerEnd - 1 })
        {
            IndexFileException e = Rejection.Assert(file[..cut]);
            Assert.Equal($"Index file is truncated in header: it needs at least {(cut < 16 ? 16 : headerEnd)} bytes, but the data stops after {cut}.", e.Message);
            Assert.Equal("header", e.Section);
        }

        foreach (int cut in new[] { 1, 7 })
        {
            Assert.Equal(
                $"Index file is truncated: it has only {cut} bytes, the start of the 8-byte magic number; a whole index file has at least 25.",
                Rejection.Assert(file[..cut]).Message);
        }
    }
}

using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.IO;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.IO;

/// <summary>
/// Every data-set writer that takes a path replaces the file atomically: a write that runs out of space part-way
/// (a 1 MiB tmpfs) leaves the previous file byte for byte and no temporary file, and the message names the target;
/// an <see cref="NpyRowWriter"/> disposed without <see cref="NpyRowWriter.Complete"/> leaves the previous file.
/// </summary>
public sealed class AtomicDataWriterTests : IDisposable
{
    private const int Dimension = 16;

    // About 2.6 MB in every format: more than the whole tmpfs, so every writer fails part-way.
    private const int LargeRows = 40_000;

    private readonly string _folder = Directory.CreateTempSubdirectory("vk-atomic-io-").FullName;

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    private static readonly string[] WriterNames = ["npy-vectors", "npy-ints", "fvecs", "ivecs", "csv", "npy-row-writer", "npy-neighbors", "vecs-neighbors"];

    public static TheoryData<string> Writers => new(WriterNames);

    [RootFact]
    public void EveryWriter_OnAFullDisk_LeavesThePreviousFiles_AndNoTemporary_AndNamesTheTarget()
    {
        using var disk = new SmallTmpfs();
        disk.Mount("1m");
        string ids = Path.Combine(disk.Folder, "catalogue.dat");
        string distances = Path.Combine(disk.Folder, "distances.dat");
        foreach (string writer in WriterNames)
        {
            Write(writer, ids, distances, rows: 3);
            byte[] idsBefore = File.ReadAllBytes(ids);
            byte[]? distancesBefore = File.Exists(distances) ? File.ReadAllBytes(distances) : null;

            var e = Assert.Throws<IOException>(() => Write(writer, ids, distances, LargeRows));
            Assert.StartsWith($"Cannot write '{ids}': writing the temporary file failed: No space left on device", e.Message, StringComparison.Ordinal);
            Assert.EndsWith("The previous file, if any, is unchanged; the temporary file was deleted.", e.Message, StringComparison.Ordinal);
            Assert.Equal(idsBefore, File.ReadAllBytes(ids));
            if (distancesBefore is not null)
            {
                Assert.Equal(distancesBefore, File.ReadAllBytes(distances));
            }

            Assert.Equal(
                distancesBefore is null ? [ids] : new[] { ids, distances }.Order(StringComparer.Ordinal),
                Directory.GetFiles(disk.Folder).Order(StringComparer.Ordinal));
            File.Delete(ids);
            File.Delete(distances);
        }
    }

    [Theory]
    [MemberData(nameof(Writers))]
    public void EveryWriter_ReplacesAPreviousFile_WithOnlyTheNewContent(string writer)
    {
        string ids = Path.Combine(_folder, "catalogue.dat");
        string distances = Path.Combine(_folder, "distances.dat");
        File.WriteAllBytes(ids, new byte[100_000]);
        File.WriteAllBytes(distances, new byte[100_000]);
        Write(writer, ids, distances, rows: 3);
        Write(writer, Path.Combine(_folder, "fresh.dat"), Path.Combine(_folder, "fresh-distances.dat"), rows: 3);
        Assert.Equal(File.ReadAllBytes(Path.Combine(_folder, "fresh.dat")), File.ReadAllBytes(ids));
        Assert.DoesNotContain(Directory.GetFiles(_folder), f => Path.GetFileName(f).StartsWith('.'));
    }

    [Fact]
    public void ARowWriterDisposedWithoutCompleting_LeavesThePreviousFile_AndCreatesNone()
    {
        string path = Path.Combine(_folder, "rows.npy");
        NpyFile.Write(path, new VectorSet([1f, 2f, 3f, 4f], 2));
        byte[] before = File.ReadAllBytes(path);
        using (NpyRowWriter writer = NpyRowWriter.Create(path, 2))
        {
            writer.Append([5f, 6f, 7f, 8f, 9f, 10f]);
            Assert.Equal(before, File.ReadAllBytes(path));
        }

        Assert.Equal(before, File.ReadAllBytes(path));
        Assert.Equal([path], Directory.GetFiles(_folder));

        string fresh = Path.Combine(_folder, "fresh.npy");
        NpyRowWriter.Create(fresh, 2).Dispose();
        Assert.False(File.Exists(fresh));
        Assert.Equal([path], Directory.GetFiles(_folder));
    }

    private static void Write(string writer, string path, string distancesPath, int rows)
    {
        float[] data = Enumerable.Range(0, rows * Dimension).Select(i => (i % 97) * 0.25f).ToArray();
        var vectors = new VectorSet(data, Dimension);
        var integers = new IntVectorSet(data.Select(v => (int)(v * 4)).ToArray(), Dimension);
        switch (writer)
        {
            case "npy-vectors": NpyFile.Write(path, vectors); break;
            case "npy-ints": NpyFile.Write(path, integers); break;
            case "fvecs": VecsFile.WriteFvecs(path, vectors); break;
            case "ivecs": VecsFile.WriteIvecs(path, integers); break;
            case "csv": CsvVectors.Write(path, vectors); break;
            case "npy-row-writer":
                using (NpyRowWriter rowWriter = NpyRowWriter.Create(path, Dimension))
                {
                    rowWriter.Append(data);
                    rowWriter.Complete();
                }

                break;
            case "npy-neighbors": NpyFile.WriteNeighbors(path, distancesPath, Results(rows)); break;
            case "vecs-neighbors": VecsFile.WriteNeighbors(path, distancesPath, Results(rows)); break;
            default: throw new ArgumentOutOfRangeException(nameof(writer));
        }
    }

    // Queries × k ids: 8 bytes per id in .npy, 4 (plus a 4-byte prefix per row) in .ivecs.
    private static BatchSearchResults Results(int rows)
    {
        using var index = new ExactIndex(2, DistanceMetric.SquaredEuclidean);
        index.AddRange(Enumerable.Range(0, 16).Select(i => (long)i).ToArray(), Enumerable.Range(0, 32).Select(i => (float)i).ToArray());
        float[] queries = Enumerable.Range(0, rows * 2).Select(i => (float)(i % 31)).ToArray();
        return index.SearchBatch(queries, 16);
    }
}

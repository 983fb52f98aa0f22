using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.IO;

namespace VectorKit.Tests.IO;

/// <summary>
/// Every data-set writer that takes a path, pointed into a missing folder: the exception names the file asked for
/// (not the temporary file these writers create beside it), and nothing is left behind.
/// </summary>
public sealed class WriterTargetMessageTests : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("vk-writers-").FullName;

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    public static TheoryData<string> Writers => new() { "npy-vectors", "npy-ints", "fvecs", "ivecs", "csv", "npy-row-writer", "npy-neighbors", "vecs-neighbors" };

    [Theory]
    [MemberData(nameof(Writers))]
    public void AWriterIntoAMissingFolder_NamesTheTargetFile(string writer)
    {
        string path = Path.Combine(_folder, "missing", "rentals.dat");
        var e = Assert.Throws<DirectoryNotFoundException>(() => Write(writer, path, distancesPath: null));
        Assert.Contains($"'{path}'", e.Message, StringComparison.Ordinal);
        Assert.Empty(Directory.GetFileSystemEntries(_folder));
    }

    [Theory]
    [InlineData("npy-neighbors")]
    [InlineData("vecs-neighbors")]
    public void ANeighborDistanceFileIntoAMissingFolder_NamesIt_AndLeavesThePreviousIdFile(string writer)
    {
        string ids = Path.Combine(_folder, "ids.dat");
        File.WriteAllBytes(ids, [1, 2, 3]);
        string distances = Path.Combine(_folder, "missing", "distances.dat");
        var e = Assert.Throws<DirectoryNotFoundException>(() => Write(writer, ids, distances));
        Assert.Contains($"'{distances}'", e.Message, StringComparison.Ordinal);
        Assert.Equal(new byte[] { 1, 2, 3 }, File.ReadAllBytes(ids));
        Assert.Equal([ids], Directory.GetFileSystemEntries(_folder));
    }

    private static void Write(string writer, string path, string? distancesPath)
    {
        var vectors = new VectorSet([1f, 2, 3, 4], 2);
        switch (writer)
        {
            case "npy-vectors": NpyFile.Write(path, vectors); break;
            case "npy-ints": NpyFile.Write(path, new IntVectorSet([1, 2], 2)); break;
            case "fvecs": VecsFile.WriteFvecs(path, vectors); break;
            case "ivecs": VecsFile.WriteIvecs(path, new IntVectorSet([1, 2], 2)); break;
            case "csv": CsvVectors.Write(path, vectors); break;
            case "npy-row-writer": NpyRowWriter.Create(path, 2).Dispose(); break;
            case "npy-neighbors": NpyFile.WriteNeighbors(path, distancesPath, Results()); break;
            case "vecs-neighbors": VecsFile.WriteNeighbors(path, distancesPath, Results()); break;
            default: throw new ArgumentOutOfRangeException(nameof(writer));
        }
    }

    private static BatchSearchResults Results()
    {
        using var index = new ExactIndex(2, DistanceMetric.SquaredEuclidean);
        index.AddRange([10L, 11], [0f, 0, 1, 1]);
        return index.SearchBatch([0f, 0], 2);
    }
}

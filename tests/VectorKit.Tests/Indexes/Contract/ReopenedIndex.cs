using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>What the contracts over an index read back from its file share: the save and reopen, and the options check.</summary>
internal static class ReopenedIndex
{
    /// <summary>Saves <paramref name="built"/> to a temporary file, opens it with <paramref name="open"/> and deletes the name.</summary>
    public static T SaveAndOpen<T>(IVectorIndex built, Func<string, T> open)
    {
        string path = Path.Combine(Path.GetTempPath(), $"vectorkit-contract-{Guid.NewGuid():N}.vkx");
        VectorKit.Persistence.IndexFile.Save(built, path);
        try
        {
            return open(path);
        }
        finally
        {
            // The mapping keeps the file's pages; the name is not needed once it is open.
            File.Delete(path);
        }
    }

    /// <summary>Options come back from the file: not the instance given, but the same settings.</summary>
    public static void AssertSameSettings(VectorIndexOptions given, VectorIndexOptions read)
        => Assert.Equal(
            (given.GetType(), given.Encoding, given.RescoreDepth, given.FullVectors),
            (read.GetType(), read.Encoding, read.RescoreDepth, read.FullVectors));
}

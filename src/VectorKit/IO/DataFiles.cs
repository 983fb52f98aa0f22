namespace VectorKit.IO;

/// <summary>File and stream plumbing shared by the format classes.</summary>
internal static class DataFiles
{
    private const int FileBufferBytes = 1 << 16;

    public static FileStream OpenRead(string path)
    {
        if (path is null)
        {
            DataFormatThrow.ArgumentNull(nameof(path));
        }

        return new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read, FileBufferBytes, FileOptions.SequentialScan);
    }

    public static FileStream Create(string path)
    {
        if (path is null)
        {
            DataFormatThrow.ArgumentNull(nameof(path));
        }

        return new FileStream(path, FileMode.Create, FileAccess.Write, FileShare.None, FileBufferBytes);
    }

    /// <summary>
    /// Creates a neighbour file's id file and, when <paramref name="distancesPath"/> is given, its distance file. When
    /// the second cannot be created, the first (just created, so empty) is closed and deleted: a failure leaves neither.
    /// </summary>
    public static (FileStream Ids, FileStream? Distances) CreatePair(string idsPath, string? distancesPath)
    {
        FileStream ids = Create(idsPath);
        if (distancesPath is null)
        {
            return (ids, null);
        }

        try
        {
            return (ids, Create(distancesPath));
        }
        catch
        {
            ids.Dispose();
            File.Delete(idsPath);
            throw;
        }
    }

    public static void CheckWritable(Stream stream)
    {
        if (stream is null)
        {
            DataFormatThrow.ArgumentNull(nameof(stream));
        }

        if (!stream.CanWrite)
        {
            DataFormatThrow.Argument(nameof(stream), "The stream does not support writing.");
        }
    }
}

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

using VectorKit.Internal;

namespace VectorKit.IO;

/// <summary>File and stream plumbing shared by the format classes.</summary>
internal static class DataFiles
{
    public const int FileBufferBytes = 1 << 16;

    public static FileStream OpenRead(string path)
    {
        if (path is null)
        {
            DataFormatThrow.ArgumentNull(nameof(path));
        }

        return new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read, FileBufferBytes, FileOptions.SequentialScan);
    }

    /// <summary>
    /// Creates or replaces <paramref name="path"/> with what <paramref name="write"/> writes, through a temporary file
    /// beside it (<see cref="DurableFile"/>): the file appears only complete, and a failure leaves the previous one.
    /// </summary>
    public static void Replace(string path, Action<Stream> write)
        => DurableFile.Replace(path, nameof(path), "write", FileBufferBytes, write);

    /// <summary>Starts replacing <paramref name="path"/> through a temporary file (<see cref="DurableFile"/>).</summary>
    public static DurableFile BeginReplace(string path, string paramName)
        => DurableFile.Begin(path, paramName, "write", FileBufferBytes);

    /// <summary>
    /// Runs a read of the file at <paramref name="path"/>; a <see cref="DataFormatException"/> leaves it naming the
    /// file (the same exception object, so its stack and inner exception stay).
    /// </summary>
    public static T Named<T>(string? path, Func<T> read)
    {
        try
        {
            return read();
        }
        catch (DataFormatException e) when (NameFile(e, path))
        {
            throw; // not reached: the filter names the file and lets the exception pass
        }
    }

    /// <summary>An exception filter: attaches the full path of <paramref name="path"/> and returns false.</summary>
    public static bool NameFile(DataFormatException e, string? path)
    {
        if (path is not null)
        {
            e.AttachFilePath(Path.GetFullPath(path));
        }

        return false;
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

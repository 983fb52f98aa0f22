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

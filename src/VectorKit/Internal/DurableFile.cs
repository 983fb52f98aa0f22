namespace VectorKit.Internal;

/// <summary>
/// Creates or replaces one file atomically and durably: the data goes to a hidden temporary file beside the target,
/// which is flushed to the disk, renamed over the target, and then the folder is flushed (<see cref="FolderFlush"/>).
/// Readers of the target see the previous file or the complete new one, never a part; a failure before the rename
/// deletes the temporary file and leaves the previous file as it was.
/// </summary>
/// <remarks>
/// Use: <see cref="Begin"/>, write to <see cref="Stream"/> (through <see cref="Write"/>, or translating exceptions with
/// <see cref="Failed"/>), then <see cref="Commit"/>; disposing without committing deletes the temporary file. Errors
/// name the target and the failing step, keep the system's exception as the inner one and its HResult, and never
/// name only the temporary file. The temporary is named <c>.name.</c><i>32 hex digits</i><c>.tmp</c>
/// (<see cref="IsTemporaryFor"/>). Not thread-safe.
/// </remarks>
internal sealed class DurableFile : IDisposable
{
    private readonly string _action;
    private readonly FileStream _file;
    private bool _flushed;
    private bool _done;

    private DurableFile(string target, string temporary, string action, FileStream file, Stream stream)
    {
        Target = target;
        TemporaryPath = temporary;
        _action = action;
        _file = file;
        Stream = stream;
    }

    /// <summary>The full path of the file being created or replaced.</summary>
    public string Target { get; }

    /// <summary>The full path of the temporary file.</summary>
    public string TemporaryPath { get; }

    /// <summary>Where the data goes (the temporary file, possibly wrapped).</summary>
    public Stream Stream { get; }

    /// <summary>Checks <paramref name="path"/> and creates the temporary file beside it.</summary>
    /// <param name="path">The target, as the caller gave it.</param>
    /// <param name="paramName">The caller's parameter name, for argument exceptions.</param>
    /// <param name="action">What the caller does, for messages: "Cannot {action} '{target}': ...".</param>
    /// <param name="bufferSize">The file stream's buffer (0 when the caller buffers).</param>
    /// <param name="wrap">Wraps the file stream (tests inject failures through it), or <see langword="null"/>.</param>
    public static DurableFile Begin(string path, string paramName, string action, int bufferSize = 0, Func<Stream, Stream>? wrap = null)
    {
        if (path is null)
        {
            throw new ArgumentNullException(paramName);
        }

        if (path.Length == 0)
        {
            ThrowHelper.ThrowArgument(paramName, "The path is empty.");
        }

        string target = Path.GetFullPath(path);
        if (Path.GetFileName(target).Length == 0)
        {
            ThrowHelper.ThrowArgument(paramName, $"The path '{path}' names a folder, not a file.");
        }

        string temporary = TemporaryPathFor(target);
        FileStream file;
        try
        {
            file = new FileStream(temporary, FileMode.CreateNew, FileAccess.Write, FileShare.None, bufferSize);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw Translate(e, Stage.Create, action, target, temporary, removed: true);
        }

        Stream stream = file;
        try
        {
            stream = wrap is null ? file : wrap(file);
        }
        catch
        {
            file.Dispose();
            TryDelete(temporary);
            throw;
        }

        return new DurableFile(target, temporary, action, file, stream);
    }

    /// <summary>Creates or replaces <paramref name="path"/> with what <paramref name="write"/> writes, atomically and durably.</summary>
    public static void Replace(string path, string paramName, string action, int bufferSize, Action<Stream> write)
    {
        using DurableFile file = Begin(path, paramName, action, bufferSize);
        file.Write(write);
        file.Commit();
    }

    /// <summary>Runs <paramref name="write"/> on <see cref="Stream"/>; an I/O failure comes back from <see cref="Failed"/>.</summary>
    public void Write(Action<Stream> write)
    {
        try
        {
            write(Stream);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw Failed(e);
        }
    }

    /// <summary>
    /// Ends a write that failed with <paramref name="e"/>: closes and deletes the temporary file, and returns the
    /// exception to throw (naming the target; <paramref name="e"/> inside).
    /// </summary>
    public Exception Failed(Exception e)
    {
        _done = true;
        bool removed = CloseAndDelete();
        return Translate(e, Stage.Write, _action, Target, TemporaryPath, removed);
    }

    /// <summary>Flushes the written data to the disk (also done by <see cref="Commit"/>; call it first on each of several files to be committed together).</summary>
    public void FlushToDisk()
    {
        ObjectDisposedException.ThrowIf(_done, this);
        if (_flushed)
        {
            return;
        }

        try
        {
            Stream.Flush();
            _file.Flush(flushToDisk: true);
            _file.Dispose();
            _flushed = true;
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw Failed(e);
        }
    }

    /// <summary>Flushes, renames the temporary file over the target, then flushes the folder.</summary>
    /// <param name="cancellationToken">Checked after the flush: a cancellation then still leaves the target as it was.</param>
    public void Commit(CancellationToken cancellationToken = default)
    {
        FlushToDisk();
        cancellationToken.ThrowIfCancellationRequested();
        try
        {
            File.Move(TemporaryPath, Target, overwrite: true);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            _done = true;
            throw Translate(e, Stage.Rename, _action, Target, TemporaryPath, TryDelete(TemporaryPath));
        }

        _done = true;
        string folder = Path.GetDirectoryName(Target) ?? ".";
        try
        {
            FolderFlush.Flush(folder);
        }
        catch (IOException e)
        {
            throw Translate(e, Stage.FlushFolder, _action, Target, TemporaryPath, removed: true);
        }
    }

    /// <summary>Without <see cref="Commit"/>: closes and deletes the temporary file, leaving the target as it was.</summary>
    public void Dispose()
    {
        if (!_done)
        {
            _done = true;
            CloseAndDelete();
        }
    }

    /// <summary>Whether <paramref name="fileName"/> has the exact shape of a temporary file for <paramref name="targetName"/>.</summary>
    public static bool IsTemporaryFor(string fileName, string targetName)
    {
        // "." + target + "." + 32 hex digits + ".tmp"; a pattern given to a folder enumeration also matches looser names.
        int expected = 1 + targetName.Length + 1 + 32 + 4;
        if (fileName.Length != expected
            || fileName[0] != '.'
            || !fileName.AsSpan(1, targetName.Length).SequenceEqual(targetName)
            || fileName[1 + targetName.Length] != '.'
            || !fileName.EndsWith(".tmp", StringComparison.Ordinal))
        {
            return false;
        }

        foreach (char c in fileName.AsSpan(targetName.Length + 2, 32))
        {
            if (!char.IsAsciiHexDigitLower(c) && !char.IsAsciiDigit(c))
            {
                return false;
            }
        }

        return true;
    }

    /// <summary>The name of a new temporary file for <paramref name="target"/> (a full path), in the same folder.</summary>
    public static string TemporaryPathFor(string target)
        => Path.Combine(Path.GetDirectoryName(target) ?? ".", $".{Path.GetFileName(target)}.{Guid.NewGuid():N}.tmp");

    private bool CloseAndDelete()
    {
        try
        {
            _file.Dispose();
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            // Closing flushes the buffer, which fails again on a full disk; the file is closed regardless.
        }

        return TryDelete(TemporaryPath);
    }

    /// <summary>
    /// The system's exception re-issued with a message that names the target first (the system's own names only the
    /// temporary file), of the same type where that type is a common one, with the same HResult, and with the
    /// original as the inner exception.
    /// </summary>
    private static Exception Translate(Exception e, Stage stage, string action, string target, string temporary, bool removed)
    {
        string folder = Path.GetDirectoryName(target) ?? ".";
        string what = stage switch
        {
            Stage.Create when e is DirectoryNotFoundException && !Directory.Exists(folder) => $"its folder '{folder}' does not exist.",
            Stage.Create => $"the temporary file could not be created in '{folder}': {e.Message}",
            Stage.Write => $"writing the temporary file failed: {e.Message}",
            Stage.Rename => $"renaming the complete temporary file over it failed: {e.Message}",
            _ => $"the new file replaced it, but {e.Message}",
        };
        string after = stage switch
        {
            Stage.Create => " Nothing was written; the previous file, if any, is unchanged.",
            Stage.FlushFolder => " A power loss now may bring back the previous file.",
            _ when removed => " The previous file, if any, is unchanged; the temporary file was deleted.",
            _ => $" The previous file, if any, is unchanged; the temporary file '{temporary}' could not be deleted.",
        };
        string message = $"Cannot {action} '{target}': {what}{(what.EndsWith('.') ? "" : ".")}{after}";
        Exception wrapped = e switch
        {
            DirectoryNotFoundException => new DirectoryNotFoundException(message, e),
            PathTooLongException => new PathTooLongException(message, e),
            UnauthorizedAccessException => new UnauthorizedAccessException(message, e),
            _ => new IOException(message, e),
        };
        wrapped.HResult = e.HResult;
        return wrapped;
    }

    private static bool TryDelete(string path)
    {
        try
        {
            File.Delete(path);
            return true;
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            return false;
        }
    }

    private enum Stage
    {
        Create,
        Write,
        Rename,
        FlushFolder,
    }
}

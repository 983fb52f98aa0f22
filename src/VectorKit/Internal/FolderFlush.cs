using System.Runtime.InteropServices;

namespace VectorKit.Internal;

/// <summary>
/// Flushes a folder's entries to the disk, so that a rename into it survives a power loss (Linux and macOS: the
/// folder is opened read-only and fsync'ed). On Windows nothing is done: the public file API cannot open a folder
/// for flushing, so a power loss right after a rename may still bring back the previous entry.
/// </summary>
internal static partial class FolderFlush
{
    private const int ReadOnly = 0;

    // EINVAL has the same number on Linux and macOS: the file system cannot flush a folder (some network and FUSE
    // ones); there is then nothing more a caller could do, so it is not an error.
    private const int InvalidArgument = 22;

    /// <summary>Flushes <paramref name="folder"/>; throws an <see cref="IOException"/> naming it and the system's reason on failure.</summary>
    public static void Flush(string folder)
    {
        if (OperatingSystem.IsWindows())
        {
            return;
        }

        // Close-on-exec, so a child process started meanwhile does not inherit the descriptor; its value differs per system.
        int flags = ReadOnly | (OperatingSystem.IsLinux() ? 0x80000 : OperatingSystem.IsMacOS() ? 0x1000000 : 0);
        int descriptor = Open(folder, flags);
        if (descriptor < 0)
        {
            throw Failure("opening", folder, Marshal.GetLastPInvokeError());
        }

        try
        {
            if (Sync(descriptor) != 0)
            {
                int error = Marshal.GetLastPInvokeError();
                if (error != InvalidArgument)
                {
                    throw Failure("flushing", folder, error);
                }
            }
        }
        finally
        {
            _ = Close(descriptor);
        }
    }

    private static IOException Failure(string step, string folder, int error)
        => new($"{step} the folder '{folder}' failed: {Marshal.GetPInvokeErrorMessage(error)}");

    [LibraryImport("libc", EntryPoint = "open", StringMarshalling = StringMarshalling.Utf8, SetLastError = true)]
    private static partial int Open(string path, int flags);

    [LibraryImport("libc", EntryPoint = "fsync", SetLastError = true)]
    private static partial int Sync(int descriptor);

    [LibraryImport("libc", EntryPoint = "close", SetLastError = true)]
    private static partial int Close(int descriptor);
}

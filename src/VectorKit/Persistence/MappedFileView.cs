using System.IO.MemoryMappedFiles;

namespace VectorKit.Persistence;

/// <summary>
/// A whole file mapped read-only into the address space: pages come from the page cache on first touch and are
/// shared with every other process mapping or reading the same file. Disposing unmaps it.
/// </summary>
/// <remarks>
/// The file is opened with delete sharing, so an atomic save that renames a new file over the path leaves this view on
/// the old one, intact. A file truncated in place while mapped would fault on access: index files are replaced, never
/// rewritten in place.
/// </remarks>
internal sealed unsafe class MappedFileView : IDisposable
{
    private readonly MemoryMappedFile _file;
    private readonly MemoryMappedViewAccessor _view;
    private byte* _start;

    private MappedFileView(MemoryMappedFile file, MemoryMappedViewAccessor view, long length)
    {
        _file = file;
        _view = view;
        Length = length;
        byte* pointer = null;
        view.SafeMemoryMappedViewHandle.AcquirePointer(ref pointer);
        _start = pointer + view.PointerOffset;
    }

    /// <summary>The first byte of the file; valid until <see cref="Dispose"/>.</summary>
    public byte* Start => _start;

    /// <summary>The file's length in bytes.</summary>
    public long Length { get; }

    /// <summary>Maps <paramref name="path"/>; an empty file (which cannot be mapped) is reported as not an index file.</summary>
    public static MappedFileView Open(string path)
    {
        var stream = new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.Read | FileShare.Delete, bufferSize: 1);
        try
        {
            long length = stream.Length;
            if (length == 0)
            {
                throw new IndexFileException("Index file not recognised: it has 0 bytes, fewer than the 8-byte magic number.", "header", 0);
            }

            var file = MemoryMappedFile.CreateFromFile(stream, mapName: null, 0, MemoryMappedFileAccess.Read, HandleInheritability.None, leaveOpen: false);
            try
            {
                return new MappedFileView(file, file.CreateViewAccessor(0, length, MemoryMappedFileAccess.Read), length);
            }
            catch
            {
                file.Dispose();
                throw;
            }
        }
        catch
        {
            stream.Dispose();
            throw;
        }
    }

    public void Dispose()
    {
        if (_start != null)
        {
            _start = null;
            _view.SafeMemoryMappedViewHandle.ReleasePointer();
            _view.Dispose();
            _file.Dispose();
        }
    }
}

namespace VectorKit.IO;

/// <summary>How a <see cref="FileVectorSource"/> gets a row from its file.</summary>
public enum FileVectorReads
{
    /// <summary>
    /// One positional read (a system call) per row into the caller's span. A file that shrinks while the source is open
    /// makes a read throw <see cref="DataFormatException"/>.
    /// </summary>
    Positional = 0,

    /// <summary>
    /// A read-only memory mapping of the whole file: a row is copied from the mapping, with no system call once its page
    /// is resident, so re-scoring many candidates per query costs memory copies rather than reads. The mapping takes
    /// address space, not memory: pages come from the operating system's page cache and are shared with other processes
    /// mapping or reading the file. The file must not shrink while the source is open (truncating a mapped file makes
    /// the process fail on its next access to the lost pages, which no exception can report); use
    /// <see cref="Positional"/> for files that other programs may change.
    /// </summary>
    Mapped = 1,
}

using VectorKit.Internal;

namespace VectorKit.Persistence;

/// <summary>
/// Caps applied while loading an index file, so that a damaged or hostile file cannot make the loader allocate,
/// loop or recurse without bound. A file that exceeds a cap raises <see cref="IndexFileException"/> before anything
/// large is allocated.
/// </summary>
/// <remarks>
/// <para>Whatever the caps, the loader checks every size the header declares against the bytes that remain in the
/// stream when its length is known (files, memory streams), before allocating; on a stream of unknown length it grows
/// its buffers only as data actually arrives. Every section is checksummed (XXH3-64), and the structure (link targets,
/// levels, entry point, unique ids, finite vector components) is validated before the index is returned.</para>
/// <para>Use <see cref="Untrusted"/> for files from outside your control. Each property is checked when it is set.
/// Instances are immutable and may be shared.</para>
/// </remarks>
public sealed class IndexLoadOptions
{
    private readonly int _maxDimension = 1 << 20;
    private readonly int _maxCount = Array.MaxLength;
    private readonly int _maxLinksPerNode = Indexes.Graph.GraphIndexOptions.MaxLinks;
    private readonly long _maxSectionBytes = long.MaxValue;
    private readonly int _maxHeaderBytes = 1 << 20;

    /// <summary>For files you wrote yourself: dimension up to 2^20, any count the library can hold, header up to 1 MiB.</summary>
    public static IndexLoadOptions Default { get; } = new();

    /// <summary>
    /// For files from outside your control: dimension up to 4,096, at most 10,000,000 vectors, at most 128 links per
    /// node on a layer, sections up to 2 GiB each, header up to 64 KiB.
    /// </summary>
    public static IndexLoadOptions Untrusted { get; } = new()
    {
        MaxDimension = 4096,
        MaxCount = 10_000_000,
        MaxLinksPerNode = 128,
        MaxSectionBytes = 2L << 30,
        MaxHeaderBytes = 64 << 10,
    };

    /// <summary>The largest dimension a file may declare. Default 2^20.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is less than 1.</exception>
    public int MaxDimension
    {
        get => _maxDimension;
        init
        {
            if (value < 1)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(MaxDimension), value, "must be at least 1");
            }

            _maxDimension = value;
        }
    }

    /// <summary>The most stored rows (vectors, removed graph slots included) a file may declare. Default <see cref="Array.MaxLength"/>.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative.</exception>
    public int MaxCount
    {
        get => _maxCount;
        init
        {
            if (value < 0)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(MaxCount), value, "must not be negative");
            }

            _maxCount = value;
        }
    }

    /// <summary>The most links per node on any one layer a graph file may declare. Default 512 (the graph's own maximum).</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [2, 512].</exception>
    public int MaxLinksPerNode
    {
        get => _maxLinksPerNode;
        init => _maxLinksPerNode = OptionChecks.InRange(value, 2, Indexes.Graph.GraphIndexOptions.MaxLinks, nameof(MaxLinksPerNode));
    }

    /// <summary>The largest single section, in bytes. Default unlimited (<see cref="long.MaxValue"/>).</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is negative.</exception>
    public long MaxSectionBytes
    {
        get => _maxSectionBytes;
        init
        {
            if (value < 0)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(MaxSectionBytes), value, "must not be negative");
            }

            _maxSectionBytes = value;
        }
    }

    /// <summary>The largest header (the MessagePack metadata block), in bytes. Default 1 MiB.</summary>
    /// <exception cref="ArgumentOutOfRangeException">The value is outside [64, 2^24].</exception>
    public int MaxHeaderBytes
    {
        get => _maxHeaderBytes;
        init
        {
            if (value < 64 || value > 1 << 24)
            {
                ThrowHelper.ThrowArgumentOutOfRange(nameof(MaxHeaderBytes), value, "must be in [64, 16777216]");
            }

            _maxHeaderBytes = value;
        }
    }
}

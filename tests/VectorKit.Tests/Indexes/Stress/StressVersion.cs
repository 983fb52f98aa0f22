namespace VectorKit.Tests.Indexes.Stress;

/// <summary>One state of an id: its vector (null when absent) and the logical times that bound when it held.</summary>
internal sealed class StressVersion(float[]? vector, long called)
{
    /// <summary>The vector written; null while the id is absent.</summary>
    public float[]? Vector { get; } = vector;

    /// <summary>What the index returned for the id right after the write (the decoded code under codes); null until the write returned.</summary>
    public float[]? Stored { get; set; }

    /// <summary>When the write that made this version was called.</summary>
    public long Called { get; } = called;

    /// <summary>When that write returned.</summary>
    public long Returned { get; set; } = long.MaxValue;

    /// <summary>When the next write of the id was called.</summary>
    public long NextCalled { get; set; } = long.MaxValue;

    /// <summary>When the next write of the id returned.</summary>
    public long NextReturned { get; set; } = long.MaxValue;
}

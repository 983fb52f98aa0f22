namespace VectorKit.Orleans;

/// <summary>
/// A write spanning several shards was acknowledged by some and not by others within the retry window. The
/// acknowledged shards hold their part durably; repeating the whole write is safe (upserts and removals are idempotent).
/// </summary>
public sealed class ShardWriteException : IOException
{
    /// <summary>Creates the exception.</summary>
    /// <param name="message">The message.</param>
    /// <param name="acknowledged">Shards whose part is durable.</param>
    /// <param name="failed">Shards whose part is not known to be written.</param>
    /// <param name="innerException">The last failure seen.</param>
    public ShardWriteException(string message, int[] acknowledged, int[] failed, Exception? innerException)
        : base(message, innerException)
    {
        AcknowledgedShards = acknowledged;
        FailedShards = failed;
    }

    /// <summary>Shards whose part is durable.</summary>
    public IReadOnlyList<int> AcknowledgedShards { get; }

    /// <summary>Shards whose part may be missing.</summary>
    public IReadOnlyList<int> FailedShards { get; }
}

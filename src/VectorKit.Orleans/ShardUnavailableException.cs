namespace VectorKit.Orleans;

/// <summary>
/// Some shard could not answer: every copy of it failed to load (damaged snapshot or log, foreign ids), or none
/// answered in time. Derives from <see cref="InvalidOperationException"/>.
/// </summary>
[GenerateSerializer]
public sealed class ShardUnavailableException : InvalidOperationException
{
    /// <summary>Creates the exception.</summary>
    /// <param name="message">The message, naming the shards and why.</param>
    /// <param name="shards">The shards.</param>
    /// <param name="transient">Whether a retry may succeed (no answer in time) rather than needing repair (a failed load).</param>
    public ShardUnavailableException(string message, int[] shards, bool transient)
        : base(message)
    {
        Shards = shards;
        IsTransient = transient;
    }

    /// <summary>The shards that did not answer, ascending.</summary>
    [Id(0)]
    public int[] Shards { get; }

    /// <summary>Whether a retry may succeed; <see langword="false"/> when a shard failed to load and needs its files repaired.</summary>
    [Id(1)]
    public bool IsTransient { get; }
}

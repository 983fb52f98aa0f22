using System.Globalization;

namespace VectorKit.Orleans;

/// <summary>Builds and reads shard grain keys, <c>"&lt;collection&gt;/&lt;shard&gt;/&lt;copy&gt;"</c>.</summary>
public static class ShardKey
{
    /// <summary>The key of one copy of one shard.</summary>
    /// <param name="collection">The collection name.</param>
    /// <param name="shard">The shard.</param>
    /// <param name="replica">The copy (0 = primary).</param>
    /// <returns>The key.</returns>
    public static string Format(string collection, int shard, int replica) => string.Create(CultureInfo.InvariantCulture, $"{collection}/{shard}/{replica}");

    /// <summary>Reads a key.</summary>
    /// <param name="key">The key.</param>
    /// <param name="collection">The collection name.</param>
    /// <param name="shard">The shard.</param>
    /// <param name="replica">The copy.</param>
    /// <returns>Whether the key has the expected form.</returns>
    public static bool TryParse(string key, out string collection, out int shard, out int replica)
    {
        collection = "";
        shard = replica = 0;
        string[] parts = key.Split('/');
        if (parts.Length != 3
            || !int.TryParse(parts[1], NumberStyles.None, CultureInfo.InvariantCulture, out shard)
            || !int.TryParse(parts[2], NumberStyles.None, CultureInfo.InvariantCulture, out replica))
        {
            return false;
        }

        collection = parts[0];
        return true;
    }
}

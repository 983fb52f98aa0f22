using System.Buffers.Binary;
using System.Security.Cryptography;
using System.Text;

namespace VectorKit.TextEmbeddings;

/// <summary>The seeded split of the texts into held-out queries and items.</summary>
internal static class Split
{
    /// <summary>
    /// Orders the texts by SHA-256 of <c>"{seed}/{package}"</c> (ties by name): the first <paramref name="queryCount"/>
    /// are the held-out queries, the next <paramref name="itemCount"/> (all the rest when null) the items. Hashing
    /// each name, rather than shuffling with a generator, keeps the order independent of the runtime and of the
    /// counts: a smaller item count is a prefix of the full item list, and the queries never change with it.
    /// </summary>
    public static (PackageText[] Queries, PackageText[] Items) Make(List<PackageText> texts, int seed, int queryCount, int? itemCount)
    {
        var keyed = new (ulong Key, PackageText Text)[texts.Count];
        for (int i = 0; i < texts.Count; i++)
        {
            byte[] hash = SHA256.HashData(Encoding.UTF8.GetBytes($"{seed}/{texts[i].Package}"));
            keyed[i] = (BinaryPrimitives.ReadUInt64LittleEndian(hash), texts[i]);
        }

        Array.Sort(keyed, (a, b) => a.Key != b.Key ? a.Key.CompareTo(b.Key) : string.CompareOrdinal(a.Text.Package, b.Text.Package));
        if (queryCount >= keyed.Length)
        {
            throw new ArgumentException($"--queries {queryCount} leaves no items: there are {keyed.Length} distinct texts.");
        }

        int available = keyed.Length - queryCount;
        int items = itemCount is null ? available : Math.Min(itemCount.Value, available);
        return (keyed[..queryCount].Select(k => k.Text).ToArray(), keyed[queryCount..(queryCount + items)].Select(k => k.Text).ToArray());
    }
}

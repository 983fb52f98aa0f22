using System.Buffers.Binary;
using System.Numerics;
using FsCheck.Xunit;
using VectorKit.Internal;

namespace VectorKit.Tests.Internal;

/// <summary>
/// The id hash: SipHash-2-4 checked against a byte-oriented reference and the test vector of the SipHash paper
/// (Aumasson and Bernstein, "SipHash: a fast short-input PRF", 2012, appendix A), and the work a hash table does on
/// ids crafted to collide under the default hash of <see cref="long"/>.
/// </summary>
public class KeyedIdComparerTests
{
    [Fact]
    public void TheReference_MatchesThePapersTestVector()
    {
        // Key 00 01 .. 0f, message 00 01 .. 0e (15 bytes): 0xa129ca6149be45e5 (the paper's appendix A; from memory).
        byte[] key = [.. Enumerable.Range(0, 16).Select(i => (byte)i)];
        byte[] message = [.. Enumerable.Range(0, 15).Select(i => (byte)i)];
        Assert.Equal(0xa129ca6149be45e5UL, ReferenceSipHash24(key, message));
    }

    [Property(MaxTest = 500)]
    public bool TheOneWordHash_EqualsTheReference(ulong k0, ulong k1, long id)
    {
        var key = new byte[16];
        BinaryPrimitives.WriteUInt64LittleEndian(key, k0);
        BinaryPrimitives.WriteUInt64LittleEndian(key.AsSpan(8), k1);
        var message = new byte[8];
        BinaryPrimitives.WriteInt64LittleEndian(message, id);
        return new KeyedIdComparer(k0, k1).Hash((ulong)id) == ReferenceSipHash24(key, message);
    }

    [Fact]
    public void CraftedIds_CollideUnderTheDefaultHash_ButNotUnderTheKeyedOne()
    {
        const int Count = 1_000_000;
        var keyed = new HashSet<int>();
        for (long i = 0; i < Count; i++)
        {
            long crafted = (i << 32) | i;
            Assert.Equal(0, crafted.GetHashCode());
            keyed.Add(KeyedIdComparer.Instance.GetHashCode(crafted));
        }

        // A random 32-bit function maps 10^6 ids to about 10^6 - 116 distinct codes (birthday bound).
        Assert.True(keyed.Count > Count - 2_000, $"{Count - keyed.Count} of {Count} crafted ids share a hash code");
    }

    [Fact]
    public void InsertingCraftedIds_ComparesKeysAboutAsOftenAsForOrdinaryIds()
    {
        // A dictionary calls Equals only for entries whose full hash code matches, so the calls count the work that
        // collisions cost. The default comparer shows the attack on a few thousand ids; the keyed one takes 10^6.
        Assert.True(EqualsCalls(EqualityComparer<long>.Default, 3_000, Crafted) >= 3_000L * 2_999 / 2);

        long crafted = EqualsCalls(KeyedIdComparer.Instance, 1_000_000, Crafted);
        long ordinary = EqualsCalls(KeyedIdComparer.Instance, 1_000_000, i => i);
        Assert.True(crafted < 5_000, $"{crafted} key comparisons inserting 10^6 crafted ids (ordinary ids: {ordinary})");
        Assert.True(ordinary < 5_000, $"{ordinary} key comparisons inserting 10^6 ordinary ids");
    }

    private static long Crafted(long i) => (i << 32) | i;

    private static long EqualsCalls(IEqualityComparer<long> inner, int count, Func<long, long> id)
    {
        var counting = new CountingComparer(inner);
        var map = new Dictionary<long, int>(counting);
        for (int i = 0; i < count; i++)
        {
            Assert.True(map.TryAdd(id(i), i));
        }

        return counting.EqualsCalls;
    }

    private sealed class CountingComparer(IEqualityComparer<long> inner) : IEqualityComparer<long>
    {
        public long EqualsCalls { get; private set; }

        public bool Equals(long x, long y)
        {
            EqualsCalls++;
            return inner.Equals(x, y);
        }

        public int GetHashCode(long obj) => inner.GetHashCode(obj);
    }

    // SipHash-2-4 over any byte string, written from the paper's description.
    private static ulong ReferenceSipHash24(byte[] key, byte[] message)
    {
        ulong k0 = BinaryPrimitives.ReadUInt64LittleEndian(key);
        ulong k1 = BinaryPrimitives.ReadUInt64LittleEndian(key.AsSpan(8));
        ulong[] v = [k0 ^ 0x736f6d6570736575UL, k1 ^ 0x646f72616e646f6dUL, k0 ^ 0x6c7967656e657261UL, k1 ^ 0x7465646279746573UL];
        int whole = message.Length / 8 * 8;
        var last = new byte[8];
        message.AsSpan(whole).CopyTo(last);
        last[7] = (byte)message.Length;
        var blocks = new List<ulong>();
        for (int at = 0; at < whole; at += 8)
        {
            blocks.Add(BinaryPrimitives.ReadUInt64LittleEndian(message.AsSpan(at)));
        }

        blocks.Add(BinaryPrimitives.ReadUInt64LittleEndian(last));
        foreach (ulong m in blocks)
        {
            v[3] ^= m;
            SipRound(v);
            SipRound(v);
            v[0] ^= m;
        }

        v[2] ^= 0xff;
        for (int r = 0; r < 4; r++)
        {
            SipRound(v);
        }

        return v[0] ^ v[1] ^ v[2] ^ v[3];
    }

    private static void SipRound(ulong[] v)
    {
        v[0] += v[1];
        v[1] = BitOperations.RotateLeft(v[1], 13) ^ v[0];
        v[0] = BitOperations.RotateLeft(v[0], 32);
        v[2] += v[3];
        v[3] = BitOperations.RotateLeft(v[3], 16) ^ v[2];
        v[0] += v[3];
        v[3] = BitOperations.RotateLeft(v[3], 21) ^ v[0];
        v[2] += v[1];
        v[1] = BitOperations.RotateLeft(v[1], 17) ^ v[2];
        v[2] = BitOperations.RotateLeft(v[2], 32);
    }
}

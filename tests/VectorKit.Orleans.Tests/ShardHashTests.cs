using System.Numerics;

namespace VectorKit.Orleans.Tests;

public sealed class ShardHashTests
{
    // The SplitMix64 finaliser computed with arbitrary-precision integers reduced mod 2^64: an independent reference
    // for the wrapping unsigned arithmetic of the package.
    private static ulong Reference(long id)
    {
        BigInteger m = BigInteger.One << 64;
        BigInteger z = ((new BigInteger(id) % m) + m + 0x9E3779B97F4A7C15UL) % m;
        z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9UL) % m;
        z = ((z ^ (z >> 27)) * 0x94D049BB133111EBUL) % m;
        return (ulong)(z ^ (z >> 31));
    }

    [Theory]
    [InlineData(0L)]
    [InlineData(1L)]
    [InlineData(-1L)]
    [InlineData(long.MaxValue)]
    [InlineData(long.MinValue)]
    [InlineData(123_456_789_012L)]
    public void Hash_matches_the_arbitrary_precision_reference(long id) => Assert.Equal(Reference(id), ShardHash.Hash(id));

    [Fact]
    public void Hash_of_zero_is_the_published_first_splitmix64_output_for_seed_zero()
    {
        // SplitMix64 seeded with 0 first outputs 0xE220A8397B1DCDAF (the generator's published test value).
        Assert.Equal(0xE220A8397B1DCDAFUL, ShardHash.Hash(0));
    }

    [Fact]
    public void Consecutive_ids_spread_evenly_over_shards()
    {
        var counts = new int[8];
        for (long id = 0; id < 80_000; id++)
        {
            counts[ShardHash.ShardOf(id, 8)]++;
        }

        // Binomial(80000, 1/8): standard deviation ~94; 5 sigma either way.
        Assert.All(counts, c => Assert.InRange(c, 10_000 - 470, 10_000 + 470));
    }

    [Fact]
    public void Shard_count_must_be_positive() => Assert.Throws<ArgumentOutOfRangeException>(() => ShardHash.ShardOf(1, 0));
}

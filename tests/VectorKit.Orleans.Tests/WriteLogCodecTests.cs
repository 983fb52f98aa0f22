namespace VectorKit.Orleans.Tests;

public sealed class WriteLogCodecTests
{
    private static byte[] Log(params WriteRecord[] records) => [.. records.SelectMany(r => WriteLogCodec.Encode(r, 2))];

    private static readonly WriteRecord First = new(1, WriteKind.Upsert, [5, -7], [1f, 2f, 3f, 4f]);
    private static readonly WriteRecord Second = new(2, WriteKind.Remove, [5], []);

    [Fact]
    public void Records_round_trip()
    {
        byte[] log = Log(First, Second);
        (List<WriteRecord> records, int valid) = WriteLogCodec.Decode(log, 2);
        Assert.Equal(log.Length, valid);
        Assert.Equal(2, records.Count);
        Assert.Equal([5L, -7L], records[0].Ids);
        Assert.Equal([1f, 2f, 3f, 4f], records[0].Vectors);
        Assert.Equal(WriteKind.Remove, records[1].Kind);
    }

    [Fact]
    public void A_torn_last_record_ends_the_log_at_the_last_complete_one()
    {
        byte[] log = Log(First, Second);
        int firstLength = WriteLogCodec.Encode(First, 2).Length;
        for (int cut = firstLength; cut < log.Length; cut++)
        {
            (List<WriteRecord> records, int valid) = WriteLogCodec.Decode(log.AsSpan(0, cut), 2);
            Assert.Single(records);
            Assert.Equal(firstLength, valid);
        }
    }

    [Fact]
    public void A_zero_filled_tail_is_a_torn_append()
    {
        byte[] log = [.. Log(First), .. new byte[40]];
        (List<WriteRecord> records, _) = WriteLogCodec.Decode(log, 2);
        Assert.Single(records);
    }

    [Fact]
    [Trait("CWE", "354")]
    public void A_flipped_bit_inside_a_complete_record_followed_by_another_is_damage()
    {
        byte[] log = Log(First, Second);
        log[30] ^= 1;
        var e = Assert.Throws<InvalidDataException>(() => WriteLogCodec.Decode(log, 2));
        Assert.Contains("checksum mismatch", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_gap_in_sequence_numbers_is_damage()
    {
        byte[] log = Log(First, Second with { Sequence = 3 });
        var e = Assert.Throws<InvalidDataException>(() => WriteLogCodec.Decode(log, 2));
        Assert.Contains("sequence 3 follows 1", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void A_record_of_another_dimension_is_damage()
    {
        Assert.Throws<InvalidDataException>(() => WriteLogCodec.Decode(Log(First), 3));
    }
}

using MessagePack;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// The header decoder counts nesting depth itself (MessagePack's security preset type cannot be used in trimmed or
/// native AOT apps); the limit must stay the one of MessagePack's untrusted-data preset, the reference here.
/// </summary>
public class IndexHeaderDepthTests
{
    [Fact]
    [Trait("Weakness", "CWE-674 uncontrolled recursion")]
    public void UnknownValues_NestUpToTheUntrustedPresetsDepth_AndNotOneLevelDeeper()
    {
        int limit = MessagePackSecurity.UntrustedData.MaximumObjectGraphDepth;
        IndexHeader original = IndexFileBytes.Header(IndexFileDamageTests.Sample("exact"));

        // The header map takes one level, so an unknown key's value may nest limit - 1 arrays.
        IndexHeader decoded = IndexHeader.Decode(WithNestedUnknownKey(original, limit - 1));
        Assert.Equal(original.Count, decoded.Count);
        Assert.Equal(original.Dimension, decoded.Dimension);

        IndexFileException e = Assert.Throws<IndexFileException>(() => IndexHeader.Decode(WithNestedUnknownKey(original, limit)));
        Assert.Equal("header", e.Section);
        Assert.IsType<InsufficientExecutionStackException>(e.InnerException);
    }

    // The header plus one unknown key "x" whose value is `arrays` nested one-element arrays around a nil.
    private static byte[] WithNestedUnknownKey(IndexHeader header, int arrays)
    {
        byte[] encoded = header.Encode();
        Assert.InRange(encoded[0], 0x80, 0x8E); // a fixmap with room for one more entry
        var result = new byte[encoded.Length + 2 + arrays + 1];
        encoded.CopyTo(result, 0);
        result[0]++;
        result[encoded.Length] = 0xA1;
        result[encoded.Length + 1] = (byte)'x';
        result.AsSpan(encoded.Length + 2, arrays).Fill(0x91);
        result[^1] = 0xC0;
        return result;
    }
}

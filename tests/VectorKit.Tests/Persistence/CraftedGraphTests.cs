using System.Buffers.Binary;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Persistence;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Graph files with valid checksums but a broken structure, as someone could craft them (the checksums are not a
/// signature): every one must be rejected before a walk could read outside its arrays.
/// </summary>
public class CraftedGraphTests
{
    private const int Links = 3;
    private const int BottomStride = (2 * Links) + 1;

    [Fact]
    [Trait("Weakness", "CWE-125 out-of-bounds read")]
    public void ALinkToASlotOutsideTheGraph_IsRejected()
    {
        string message = Reject(file => SetBottom(file, slot: 4, index: 1, value: 40_000));
        Assert.Contains("slot 4, layer 0: link 1 points to slot 40000, outside [0, 40)", message, StringComparison.Ordinal);
        Assert.Contains("outside [0, 40)", Reject(file => SetBottom(file, slot: 4, index: 1, value: -1)), StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-125 out-of-bounds read")]
    public void ALinkCountAboveTheLimit_IsRejected()
        => Assert.Contains($"slot 2 has {BottomStride} links on layer 0; expected 0 to {BottomStride - 1}", Reject(file => SetBottom(file, slot: 2, index: 0, value: BottomStride)), StringComparison.Ordinal);

    [Fact]
    [Trait("Weakness", "CWE-125 out-of-bounds read")]
    public void AnUpperLayerLinkToANodeWithoutThatLayer_IsRejected()
    {
        string message = Reject(file =>
        {
            byte[] levels = Payload(file, SectionId.NodeLevels);
            int low = Array.FindIndex(levels, l => l == 0);
            SpanOf(file, SectionId.UpperLinks, out int start);
            BinaryPrimitives.WriteInt32LittleEndian(file.AsSpan(start + 4), low);
            BinaryPrimitives.WriteInt32LittleEndian(file.AsSpan(start), Math.Max(1, BinaryPrimitives.ReadInt32LittleEndian(file.AsSpan(start))));
        });
        Assert.Contains("whose level 0 is below the layer", message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-125 out-of-bounds read")]
    public void ALevelRaisedWithoutItsLinks_IsRejected()
    {
        // One more layer for slot 0 needs more upper-layer ints than the section holds.
        string message = Reject(file => Payload(file, SectionId.NodeLevels, (levels, at) => file[at] = (byte)(levels[0] + 1)));
        Assert.Contains("the header's counts require", message, StringComparison.Ordinal);
        Assert.Contains("a node has level 200; the most is 30", Reject(file => Payload(file, SectionId.NodeLevels, (_, at) => file[at] = 200)), StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void ABadEntryPoint_IsRejected()
    {
        using GraphIndex graph = PersistenceSamples.Graph();
        byte[] file = IndexFileBytes.Save(graph);
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        long entry = header.Integers["entry-slot"];
        header.Integers["entry-level"] = header.Integers["entry-level"] + 1;
        Assert.Contains("is not a live slot of that level", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);
        header.Integers["entry-level"] = header.Integers["entry-level"] - 1;
        header.Integers["entry-slot"] = 1000;
        Assert.Contains("the field 'entry-slot' is 1000; expected a value in [-1, 39]", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);
        header.Integers["entry-slot"] = 0; // slot 0 (id 500) is removed in the sample
        Assert.Contains("entry point (slot 0", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);
        Assert.NotEqual(0, entry);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void RemovalFlagsDisagreeingWithTheCount_OrLinkingRemovedSlots_AreRejected()
    {
        Assert.Contains("removal flag 2", Reject(file => Payload(file, SectionId.RemovedFlags, (_, at) => file[at + 5] = 2)), StringComparison.Ordinal);
        Assert.Contains("37 slots are live, but the count is 38", Reject(file => Payload(file, SectionId.RemovedFlags, (_, at) => file[at + 5] = 1)), StringComparison.Ordinal);
        // After the global pass the removed slots have no links left, so no live list may name them.
        Assert.Contains("points to removed slot 0, which has no links of its own", Reject(file => SetBottom(file, slot: 5, index: 1, value: 0), settled: true), StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void DuplicateLiveIds_AreRejected()
    {
        string message = Reject(file => Payload(file, SectionId.Ids, (_, at) => BinaryPrimitives.WriteInt64LittleEndian(file.AsSpan(at + (8 * 5)), 500 + (3 * 4))));
        Assert.Contains("id 512 is live at slots 4 and 5", message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void NonFiniteVectorComponents_AreRejected()
    {
        string message = Reject(file => Payload(file, SectionId.Vectors, (_, at) => BinaryPrimitives.WriteSingleLittleEndian(file.AsSpan(at + (4 * 9)), float.NaN)));
        Assert.Contains("non-finite vector component (NaN) at row 2, component 1", message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void AFullVectorLocationThatDisagreesWithTheSections_IsRejected()
    {
        using GraphIndex external = PersistenceSamples.ScalarGraph(rescoreDepth: 4, fullVectors: FullVectorLocation.ExternalSource);
        byte[] file = IndexFileBytes.Save(external);
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        Assert.Equal(1, header.Integers["full-vector-location"]);
        Assert.DoesNotContain(IndexFileBytes.Map(file), s => s.Id == (uint)SectionId.Vectors);

        // Claimed in memory, but no vectors stored; and a value that names no location.
        header.Integers.Remove("full-vector-location");
        Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file)));
        header.Integers["full-vector-location"] = 2;
        Assert.Contains("the field 'full-vector-location' is 2; expected a value in [0, 1]", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);

        // Claimed external over a file that stores the vectors: the section is left over, where the id order belongs.
        using GraphIndex memory = PersistenceSamples.ScalarGraph(rescoreDepth: 4);
        byte[] withVectors = IndexFileBytes.Save(memory);
        IndexHeader memoryHeader = IndexFileBytes.CopyHeader(IndexFileBytes.Header(withVectors));
        Assert.False(memoryHeader.Integers.ContainsKey("full-vector-location"));
        memoryHeader.Integers["full-vector-location"] = 1;
        Assert.Contains("section 8 is 'Vectors' (id 2); this index kind expects 'IdOrder' (id 14) there", Rejection.Assert(IndexFileBytes.Compose(memoryHeader, IndexFileBytes.Payloads(withVectors))).Message, StringComparison.Ordinal);
    }

    private static string Reject(Action<byte[]> damage, bool settled = false)
    {
        using GraphIndex graph = PersistenceSamples.Graph();
        if (settled)
        {
            graph.RunFullPass();
        }

        byte[] file = IndexFileBytes.Save(graph);
        damage(file);
        IndexFileBytes.FixChecksums(file);
        return Rejection.Assert(file).Message;
    }

    private static void SetBottom(byte[] file, int slot, int index, int value)
    {
        SpanOf(file, SectionId.BottomLinks, out int start);
        BinaryPrimitives.WriteInt32LittleEndian(file.AsSpan(start + (4 * ((slot * BottomStride) + index))), value);
        if (index > 0 && BinaryPrimitives.ReadInt32LittleEndian(file.AsSpan(start + (4 * slot * BottomStride))) < index)
        {
            BinaryPrimitives.WriteInt32LittleEndian(file.AsSpan(start + (4 * slot * BottomStride)), index);
        }
    }

    private static byte[] Payload(byte[] file, SectionId id) => SpanOf(file, id, out _).ToArray();

    private static void Payload(byte[] file, SectionId id, Action<byte[], int> edit)
    {
        byte[] copy = SpanOf(file, id, out int start).ToArray();
        edit(copy, start);
    }

    private static Span<byte> SpanOf(byte[] file, SectionId id, out int start)
    {
        SectionSpan section = IndexFileBytes.Map(file).Single(s => s.Id == (uint)id);
        start = (int)section.PayloadStart;
        return file.AsSpan(start, (int)section.Length);
    }
}

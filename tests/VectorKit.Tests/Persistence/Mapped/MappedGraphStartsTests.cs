using System.Buffers.Binary;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Internal;
using VectorKit.Persistence;
using Xunit.Abstractions;
using static VectorKit.Tests.Persistence.Mapped.MappedGraphTests;

namespace VectorKit.Tests.Persistence.Mapped;

/// <summary>
/// The graph's upper-layer starts (format version 6): a trusted mapped open reads nothing per slot, so its cost does
/// not grow with the graph; a damaged column is rejected when verifying (and by a load), and read without leaving the
/// section otherwise.
/// </summary>
public sealed class MappedGraphStartsTests(ITestOutputHelper output) : IDisposable
{
    private readonly TempFolder _folder = new();

    public void Dispose() => _folder.Dispose();

    public static TheoryData<string> Damages => new() { "past-the-end", "far-past-the-end", "negative", "decreasing", "shifted" };

    [Fact]
    public void ATrustedMappedOpen_AllocatesTheSameAt2000And200000Slots_WhileAVersion5FileGrowsWithThem()
    {
        string small = _folder.File("small.vkx");
        string large = _folder.File("large.vkx");
        WriteSynthetic(small, 2_000);
        WriteSynthetic(large, 200_000);
        string smallOld = _folder.Write(WithoutStarts(File.ReadAllBytes(small)));
        string largeOld = _folder.Write(WithoutStarts(File.ReadAllBytes(large)));

        Allocated(small); // the first open pays for type loading
        long smallBytes = Allocated(small);
        long largeBytes = Allocated(large);
        Assert.True(Math.Abs(largeBytes - smallBytes) < 64 * 1024, $"opening allocated {smallBytes} bytes at 2,000 slots and {largeBytes} at 200,000");

        // The same files without the starts (version 5) build them at open, 4 bytes per slot: the measure sees that.
        // Its first open pays for its own path's type loading; the bound is 3 of those 4 bytes, as the difference is
        // otherwise exactly the starts' and any one-off allocation on the small side took it under.
        Allocated(smallOld);
        long smallOldBytes = Allocated(smallOld);
        long largeOldBytes = Allocated(largeOld);
        output.WriteLine($"managed bytes allocated by a trusted mapped open: version 6 {smallBytes} (2,000 slots), {largeBytes} (200,000); version 5 {smallOldBytes}, {largeOldBytes}");
        Assert.True(largeOldBytes - smallOldBytes > 3L * 198_000, $"a version-5 open allocated {smallOldBytes} bytes at 2,000 slots and {largeOldBytes} at 200,000");

        // Both open to the same graph.
        using GraphIndex current = IndexFile.OpenMapped<GraphIndex>(large);
        using GraphIndex old = IndexFile.OpenMapped<GraphIndex>(largeOld, MappedOpenOptions.Untrusted);
        foreach (float x in new[] { 0f, 77_777.4f, 199_999f })
        {
            SearchHit[] hits = current.Search([x, 1], 5, new SearchOptions { SearchWidth = 32 });
            Assert.Equal(old.Search([x, 1], 5, new SearchOptions { SearchWidth = 32 }), hits);
            Assert.NotEmpty(hits);
        }

        static long Allocated(string path)
        {
            long before = GC.GetAllocatedBytesForCurrentThread();
            IndexFile.OpenMapped<GraphIndex>(path).Dispose();
            return GC.GetAllocatedBytesForCurrentThread() - before;
        }
    }

    [Theory]
    [MemberData(nameof(Damages))]
    [Trait("Weakness", "CWE-125 out-of-bounds read")]
    public void ADamagedStart_IsRejectedWhenVerifyingAndByALoad_AndReadInsideTheSectionOtherwise(string damage)
    {
        byte[] file = SaveBytes(Build("float32-l2", count: 400, seed: 2));
        byte[] levels = Section(file, SectionId.NodeLevels);
        int upperInts = Section(file, SectionId.UpperLinks).Length / sizeof(int);
        int[] upper = Enumerable.Range(0, levels.Length).Where(slot => levels[slot] > 0).ToArray();
        Assert.True(upper.Length >= 2, "the sample needs two nodes above the bottom layer");
        int slot = damage == "shifted" ? upper[0] : upper[^1];
        byte[] damaged = (byte[])file.Clone();
        EditSection(damaged, SectionId.UpperLinkStarts, starts =>
        {
            int stored = BinaryPrimitives.ReadInt32LittleEndian(starts[(slot * 4)..]);
            int value = damage switch
            {
                // The last upper node's blocks run past the section by one int, by far, or start before it.
                "past-the-end" => upperInts - (levels[slot] * 17) + 1,
                "far-past-the-end" => int.MaxValue - 3,
                "negative" => -17,

                // The last upper node points back at the first one's blocks (the column decreases), or the first one's
                // blocks are one int off (overlapping the next node's, still inside the section).
                "decreasing" => BinaryPrimitives.ReadInt32LittleEndian(starts[(upper[0] * 4)..]),
                _ => stored + 1,
            };
            BinaryPrimitives.WriteInt32LittleEndian(starts[(slot * 4)..], value);
        });
        string path = _folder.Write(damaged);

        IndexFileException verified = Assert.Throws<IndexFileException>(() => IndexFile.OpenMapped<GraphIndex>(path, MappedOpenOptions.Untrusted).Dispose());
        Assert.Equal("UpperLinkStarts", verified.Section);
        Assert.Contains($"section 'UpperLinkStarts' (id 17)", verified.Message, StringComparison.Ordinal);
        Assert.Contains($"slot {slot} starts at int ", verified.Message, StringComparison.Ordinal);
        IndexFileException loaded = Assert.Throws<IndexFileException>(() => IndexFile.Load<GraphIndex>(path, IndexLoadOptions.Untrusted).Dispose());
        Assert.Equal("UpperLinkStarts", loaded.Section);
        Assert.Contains($"slot {slot} starts at int ", loaded.Message, StringComparison.Ordinal);

        // Unverified: every walk and read stays inside the mapping; a node whose blocks would leave the section has no
        // upper layers. Searches at every width answer with stored, live ids only.
        using GraphIndex mapped = IndexFile.OpenMapped<GraphIndex>(path);
        float[] queries = Data(10, 9);
        foreach (int width in new[] { 1, 10, 400 })
        {
            for (int q = 0; q < 10; q++)
            {
                SearchHit[] hits = mapped.Search(queries.AsSpan(q * Dim, Dim), 10, new SearchOptions { SearchWidth = width });
                Assert.InRange(hits.Length, 1, 10);
                Assert.All(hits, hit => Assert.True(mapped.Contains(hit.Id)));
            }
        }
    }

    [Fact]
    [Trait("Weakness", "CWE-130 length inconsistency")]
    public void AStartsSectionOfTheWrongLength_IsRejectedEvenUnverified()
    {
        byte[] file = SaveBytes(Build("scalar", count: 200, seed: 3));
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        List<byte[]> payloads = IndexFileBytes.Payloads(file);
        int at = header.Sections.FindIndex(s => s.Id == (uint)SectionId.UpperLinkStarts);
        payloads[at] = payloads[at][..^4];
        header.Sections[at] = new SectionEntry((uint)SectionId.UpperLinkStarts, 0, payloads[at].Length);
        byte[] shorter = IndexFileBytes.Compose(header, payloads, 6);
        foreach (MappedOpenOptions options in new[] { MappedOpenOptions.Default, MappedOpenOptions.Untrusted })
        {
            IndexFileException e = Assert.Throws<IndexFileException>(() => IndexFile.OpenMapped<GraphIndex>(_folder.Write(shorter), options).Dispose());
            Assert.Contains("section 'UpperLinkStarts' (id 17)", e.Message, StringComparison.Ordinal);
            Assert.Contains("its length is 796 bytes; the header's counts require 800", e.Message, StringComparison.Ordinal);
        }

        Assert.Contains("its length is 796 bytes; the header's counts require 800", Rejection.Assert(shorter).Message, StringComparison.Ordinal);

        // A file cut inside the column.
        byte[] cut = file[..(int)IndexFileBytes.Map(file).Single(s => s.Id == (uint)SectionId.UpperLinkStarts).ChecksumStart];
        Assert.Throws<IndexFileException>(() => IndexFile.OpenMapped<GraphIndex>(_folder.Write(cut)).Dispose());
    }

    /// <summary>The same file as format version 5: the header and sections without <see cref="SectionId.UpperLinkStarts"/>.</summary>
    internal static byte[] WithoutStarts(byte[] file)
    {
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        List<byte[]> payloads = IndexFileBytes.Payloads(file);
        int at = header.Sections.FindIndex(s => s.Id == (uint)SectionId.UpperLinkStarts);
        header.Sections.RemoveAt(at);
        payloads.RemoveAt(at);
        return IndexFileBytes.Compose(header, payloads, 5);
    }

    // A valid graph of `slots` two-dimensional points (i, 0) built from its parts, not by inserts (so that 200,000 slots
    // take a moment): a ring on the bottom layer, every 16th node on layer 1 with an empty list, node 0 the entry on 2.
    private static void WriteSynthetic(string path, int slots)
    {
        var options = new GraphIndexOptions { LinksPerNode = 2, MaxDegreeOfParallelism = 1 };
        int bottomStride = options.EffectiveBottomLayerLinks + 1;
        var levels = new byte[slots];
        var bottom = new int[slots * bottomStride];
        var vectors = new VectorBuffer(2, slots);
        int upperInts = 0;
        for (int i = 0; i < slots; i++)
        {
            levels[i] = (byte)(i == 0 ? 2 : i % 16 == 0 ? 1 : 0);
            upperInts += levels[i] * (options.LinksPerNode + 1);
            bottom[i * bottomStride] = 2;
            bottom[(i * bottomStride) + 1] = (i + 1) % slots;
            bottom[(i * bottomStride) + 2] = (i + slots - 1) % slots;
            vectors.RowSpan(i)[0] = i;
            vectors.RowSpan(i)[1] = 0;
        }

        using GraphIndex graph = GraphIndex.FromParts(new GraphIndexParts
        {
            Dimension = 2,
            Metric = DistanceMetric.SquaredEuclidean,
            Options = options,
            Slots = slots,
            Count = slots,
            Ids = Enumerable.Range(0, slots).Select(i => 7L * i).ToArray(),
            Removed = new byte[slots],
            Levels = levels,
            BottomLinks = bottom,
            UpperLinks = new int[upperInts],
            Vectors = vectors,
            EntrySlot = 0,
            EntryLevel = 2,
        });
        IndexFile.Save(graph, path);
    }
}

using System.Buffers.Binary;
using MessagePack;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using VectorKit.Tests.IO;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// Damaged and hostile files: each must raise <see cref="IndexFileException"/> with a message naming the problem and
/// its place, promptly, allocating little more than the input. Tagged by weakness class (CWE numbers).
/// </summary>
public class IndexFileDamageTests
{
    public static TheoryData<string> Samples => new() { "exact", "exact-cosine", "graph", "graph-inner-product", "ivf-float32", "ivf-product", "ivf-scalar", "ivf-external", "exact-scalar", "exact-scalar-full", "exact-scalar-external", "graph-scalar", "graph-scalar-full", "graph-scalar-external" };

    [Theory]
    [MemberData(nameof(Samples))]
    [Trait("Weakness", "CWE-354 integrity check")]
    public void EverySingleByteFlip_InTheHeaderAndEverySection_IsRejected(string sample)
    {
        byte[] file = Sample(sample);
        List<SectionSpan> sections = IndexFileBytes.Map(file);
        Assert.Equal(file.Length, sections[^1].End);
        foreach (byte mask in new byte[] { 0x01, 0x80, 0xFF })
        {
            for (int i = 0; i < file.Length; i++)
            {
                byte[] damaged = (byte[])file.Clone();
                damaged[i] ^= mask;
                IndexFileException e = Rejection.Assert(damaged);

                // A flip inside a payload is reported against that section, at the payload's start.
                SectionSpan? inside = sections.FirstOrDefault(s => i >= s.PayloadStart && i < s.ChecksumStart);
                if (inside is not null)
                {
                    Assert.Equal(inside.Name, e.Section);
                    Assert.Contains("checksum", e.Message, StringComparison.Ordinal);
                    Assert.Equal(inside.PayloadStart, e.Offset);
                }
            }
        }
    }

    [Theory]
    [MemberData(nameof(Samples))]
    [Trait("Weakness", "CWE-130 length inconsistency")]
    public void TruncationAtEverySectionBoundaryAndAtRandomPoints_IsRejected(string sample)
    {
        byte[] file = Sample(sample);
        var cuts = new SortedSet<int> { 0, 1, 7, 8, 15, 16, IndexFileBytes.HeaderEnd(file) - 8, IndexFileBytes.HeaderEnd(file), file.Length - 1 };
        foreach (SectionSpan s in IndexFileBytes.Map(file))
        {
            foreach (long cut in new[] { s.FrameStart, s.FrameStart + 8, s.PayloadStart, s.PayloadStart + 1, s.ChecksumStart, s.ChecksumStart + 4, s.End - 1 })
            {
                cuts.Add((int)cut);
            }
        }

        var random = new Random(sample.Length);
        for (int i = 0; i < 40; i++)
        {
            cuts.Add(random.Next(file.Length));
        }

        foreach (int cut in cuts.Where(c => c < file.Length))
        {
            byte[] truncated = file[..cut];

            // Seekable: the declared sizes exceed the length before anything is read. Non-seekable: the data runs out.
            IndexFileException seekable = Rejection.Assert(truncated);
            Assert.Matches("truncated|has only|fewer than|first 8 bytes", seekable.Message);
            IndexFileException trickling = Rejection.Assert(truncated, open: bytes => new TrickleStream(bytes, 997));
            Assert.Matches("truncated|fewer than|first 8 bytes", trickling.Message);
        }
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void RandomGarbage_IsRejected_WithOrWithoutTheMagicNumber()
    {
        var random = new Random(20261202);
        byte[] valid = Sample("graph");
        for (int i = 0; i < 500; i++)
        {
            byte[] garbage = new byte[random.Next(0, 4096)];
            random.NextBytes(garbage);
            Rejection.Assert(garbage);
            if (garbage.Length >= 16)
            {
                valid.AsSpan(0, 16 + (i % 2 == 0 ? 0 : Math.Min(garbage.Length - 16, 40))).CopyTo(garbage);
                Rejection.Assert(garbage);
            }
        }

        Assert.Equal("Index file not recognised: it has 0 bytes, fewer than the 8-byte magic number.", Rejection.Assert([]).Message);
        Assert.Equal(
            "Index file not recognised: the first 8 bytes are 89504E470D0A1A0A; an index file starts with 564B49580D0A1A0A.",
            Rejection.Assert([0x89, 0x50, 0x4E, 0x47, 0x0D, 0x0A, 0x1A, 0x0A, 0, 0, 0, 0]).Message);
    }

    [Theory]
    [InlineData(1_000_000_000_000L)]
    [InlineData(long.MaxValue)]
    [InlineData(-1L)]
    [Trait("Weakness", "CWE-789 excessive allocation")]
    public void HeaderClaimingAbsurdCounts_IsRejectedBeforeAllocating(long rows)
    {
        byte[] file = Sample("exact");
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        header.Rows = rows;
        header.Count = rows;
        IndexFileException e = Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file)));
        Assert.Contains($"declares {rows} stored rows", e.Message, StringComparison.Ordinal);
        Assert.Equal("header", e.Section);
    }

    [Theory]
    [InlineData(int.MaxValue)]
    [InlineData(0)]
    [InlineData(-5)]
    [Trait("Weakness", "CWE-789 excessive allocation")]
    public void HeaderClaimingAnAbsurdDimension_IsRejected(int dimension)
    {
        byte[] file = Sample("exact");
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        header.Dimension = dimension;
        IndexFileException e = Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file)));
        Assert.Contains($"the dimension is {dimension}; expected 1 to {IndexLoadOptions.Default.MaxDimension}", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-789 excessive allocation")]
    public void CountsWithinTheCapsButSectionsLargerThanTheFile_AreRejectedBeforeAllocating()
    {
        // 2^20 rows of 2^20 floats would be 4 TiB: consistent lengths, but the file holds a few hundred bytes.
        byte[] file = Sample("exact");
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        header.Dimension = 1 << 20;
        header.Rows = header.Count = 1 << 20;
        header.Sections.Clear();
        header.Sections.Add(new SectionEntry((uint)SectionId.Ids, 0, 8L << 20));
        header.Sections.Add(new SectionEntry((uint)SectionId.Vectors, 0, 4L << 40));
        byte[] hostile = IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file)[..2]);
        IndexFileException e = Rejection.Assert(hostile);
        System.Text.RegularExpressions.Match said = System.Text.RegularExpressions.Regex.Match(e.Message, $"^Index file is truncated: its header declares (\\d+) bytes in all, but the file has only {hostile.Length} ");
        Assert.True(said.Success, e.Message);
        Assert.True(long.Parse(said.Groups[1].Value, System.Globalization.CultureInfo.InvariantCulture) > (4L << 40) + (8L << 20), e.Message);

        // On a stream of unknown length the loader cannot check up front: it must grow only as data arrives.
        IndexFileException streamed = Rejection.Assert(hostile, open: bytes => new TrickleStream(bytes, 4096));
        Assert.Contains("truncated", streamed.Message, StringComparison.Ordinal);

        // The untrusted preset refuses such a header outright.
        Assert.Contains("MaxDimension", Rejection.Assert(hostile, IndexLoadOptions.Untrusted).Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-190 integer overflow")]
    public void SectionLengthsThatOverflowWhenAdded_AreRejected()
    {
        byte[] file = Sample("exact");
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        header.Sections[0] = header.Sections[0] with { Length = long.MaxValue - 8 };
        header.Sections[1] = header.Sections[1] with { Length = long.MaxValue - 8 };
        IndexFileException e = Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file)));
        Assert.Contains("overflow", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-130 length inconsistency")]
    public void SectionLengthDisagreeingWithTheCounts_IsRejected()
    {
        byte[] file = Sample("exact");
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        List<byte[]> payloads = IndexFileBytes.Payloads(file);
        payloads[0] = payloads[0][..^8];
        header.Sections[0] = header.Sections[0] with { Length = payloads[0].Length };
        IndexFileException e = Rejection.Assert(IndexFileBytes.Compose(header, payloads));
        Assert.Equal("Ids", e.Section);
        Assert.Contains($"its length is {payloads[0].Length} bytes; the header's counts require {payloads[0].Length + 8}", e.Message, StringComparison.Ordinal);
    }

    [Fact]
    [Trait("Weakness", "CWE-674 uncontrolled recursion")]
    public void DeeplyNestedHeaderValues_AreRejectedWithoutOverflowingTheStack()
    {
        byte[] file = Sample("exact");
        IndexHeader header = IndexFileBytes.Header(file);
        byte[] encoded = header.Encode();

        // Add an unknown key whose value nests 100,000 arrays: a recursive skip would overflow the stack.
        var nested = new byte[encoded.Length + 1 + 2 + 100_000 + 1];
        encoded.CopyTo(nested, 0);
        nested[0] = 0x88; // fixmap with 8 entries instead of 7
        int at = encoded.Length;
        nested[at++] = 0xA1;
        nested[at++] = (byte)'x';
        at++;
        nested.AsSpan(at - 1, 100_000).Fill(0x91);
        nested[^2] = 0x91;
        nested[^1] = 0xC0;
        byte[] hostile = WithHeaderBytes(file, nested);
        IndexFileException e = Rejection.Assert(hostile);
        Assert.Equal("header", e.Section);
        Assert.IsType<InsufficientExecutionStackException>(e.InnerException);
    }

    [Fact]
    [Trait("Weakness", "CWE-843 type confusion")]
    public void HeaderValuesOfTheWrongType_AreRejected_NoTypeIsTakenFromTheFile()
    {
        byte[] file = Sample("graph");
        byte[] encoded = IndexFileBytes.Header(file).Encode();
        var buffer = new System.Buffers.ArrayBufferWriter<byte>();
        var writer = new MessagePackWriter(buffer);
        writer.WriteMapHeader(2);
        writer.Write("kind");
        writer.Write("System.Diagnostics.Process, System");
        writer.Write("dimension");
        writer.Write(4);
        writer.Flush();
        IndexFileException e = Rejection.Assert(WithHeaderBytes(file, buffer.WrittenSpan.ToArray()));
        Assert.Contains("at key 'kind'", e.Message, StringComparison.Ordinal);
        Assert.NotEmpty(encoded);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void UnknownIndexKindAndMetric_AreNamed()
    {
        byte[] file = Sample("exact");
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        header.Kind = (IndexKind)77;
        Assert.Contains("the index kind is 77, which this library does not know (it knows 1 = Exact, 2 = Graph, 3 = InvertedFile)", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);
        header.Kind = IndexKind.Exact;
        header.Metric = (DistanceMetric)9;
        Assert.Contains("the metric code is 9", Rejection.Assert(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))).Message, StringComparison.Ordinal);
    }

    [Theory]
    [InlineData(FileLayout.CurrentVersion + 1)]
    [InlineData(0xFFFFFFFFu)]
    [Trait("Weakness", "CWE-20 input validation")]
    public void AFutureFormatVersion_FailsNamingBothVersions(uint version)
    {
        byte[] file = Sample("exact");
        BinaryPrimitives.WriteUInt32LittleEndian(file.AsSpan(8), version);
        IndexFileException e = Rejection.Assert(file);
        Assert.Equal(
            $"Index file format version {version} is not supported: this library reads versions 1 to {FileLayout.CurrentVersion}; the file was written by a newer library.",
            e.Message);
    }

    [Fact]
    [Trait("Weakness", "CWE-20 input validation")]
    public void TrailingBytesAfterTheLastSection_AreRejectedForAFile()
    {
        string path = Path.Combine(Path.GetTempPath(), $"vk-trailing-{Guid.NewGuid():N}.vkx");
        try
        {
            File.WriteAllBytes(path, [.. Sample("exact"), 0, 0, 0]);
            var e = Assert.Throws<IndexFileException>(() => IndexFile.Load(path));
            Assert.StartsWith($"Index file '{path}' has 3 unexpected bytes after its last section", e.Message, StringComparison.Ordinal);
        }
        finally
        {
            File.Delete(path);
        }
    }

    [Fact]
    [Trait("Weakness", "CWE-1284 improper quantity validation")]
    public void UntrustedPreset_RejectsHeadersBeyondItsCaps()
    {
        byte[] file = Sample("graph");
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        var caps = new IndexLoadOptions { MaxLinksPerNode = 2 };
        Assert.Contains("the field 'links-per-node' is 3; expected a value in [2, 2]", Rejection.Assert(file, caps).Message, StringComparison.Ordinal);
        Assert.Contains("MaxCount", Rejection.Assert(file, new IndexLoadOptions { MaxCount = 5 }).Message, StringComparison.Ordinal);
        Assert.Contains("MaxSectionBytes", Rejection.Assert(file, new IndexLoadOptions { MaxSectionBytes = 100 }).Message, StringComparison.Ordinal);
        Assert.Contains("MaxHeaderBytes", Rejection.Assert(file, new IndexLoadOptions { MaxHeaderBytes = 64 }).Message, StringComparison.Ordinal);
        Assert.NotNull(header);
    }

    [Fact]
    public void UnknownSkippableSections_AreSkipped_UnknownRequiredOnesRejected()
    {
        byte[] file = Sample("exact");
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        List<byte[]> payloads = IndexFileBytes.Payloads(file);
        byte[] extra = [1, 2, 3, 4, 5];
        header.Sections.Insert(1, new SectionEntry(99, 1, extra.Length));
        payloads.Insert(1, extra);
        header.Sections.Add(new SectionEntry(98, 1, extra.Length));
        payloads.Add(extra);
        using (var loaded = IndexFileBytes.Load(IndexFileBytes.Compose(header, payloads)))
        {
            Assert.Equal(12, loaded.Count);
        }

        header.Sections[1] = new SectionEntry(99, 0, extra.Length);
        Assert.Contains("section 1 is id 99; this index kind expects 'Vectors' (id 2) there", Rejection.Assert(IndexFileBytes.Compose(header, payloads)).Message, StringComparison.Ordinal);
    }

    [Fact]
    public void AnAbsentOptionalGraphField_LoadsAsTheDefault()
    {
        using var graph = new GraphIndex(4, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { FilteredExactScanFraction = 0.05 });
        graph.AddRange([1, 2, 3], [1f, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1, 0]);
        byte[] file = IndexFileBytes.Save(graph);
        IndexHeader header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
        Assert.True(header.Reals.Remove("filtered-exact-scan-fraction"));
        using var loaded = IndexFile.Load<GraphIndex>(new MemoryStream(IndexFileBytes.Compose(header, IndexFileBytes.Payloads(file))));
        Assert.Equal(GraphIndexOptions.Default.FilteredExactScanFraction, loaded.Options.FilteredExactScanFraction);
        Assert.Equal(graph.Count, loaded.Count);
    }

    internal static byte[] Sample(string name)
    {
        using IVectorIndex index = name switch
        {
            "exact" => PersistenceSamples.Exact(),
            "exact-cosine" => PersistenceSamples.Exact(metric: DistanceMetric.Cosine),
            "graph" => PersistenceSamples.Graph(),
            "graph-inner-product" => PersistenceSamples.Graph(metric: DistanceMetric.InnerProduct, seed: 5),
            "ivf-float32" => PersistenceSamples.InvertedFile(VectorEncoding.Float32, count: 16),
            // Product codes of one component per byte keep the codebooks (dimension × 256 floats) small.
            "ivf-product" => PersistenceSamples.InvertedFile(VectorEncoding.ProductCodes, DistanceMetric.InnerProduct, count: 16, dimension: 2, rescoreDepth: 4),
            "ivf-scalar" => PersistenceSamples.InvertedFile(VectorEncoding.Scalar8Bit, DistanceMetric.Cosine, count: 16, rescoreDepth: 3),
            "ivf-external" => PersistenceSamples.InvertedFile(VectorEncoding.Scalar8Bit, count: 16, rescoreDepth: 3, fullVectors: FullVectorLocation.ExternalSource),
            "exact-scalar" => PersistenceSamples.ExactScalar(),
            "exact-scalar-full" => PersistenceSamples.ExactScalar(metric: DistanceMetric.Cosine, rescoreDepth: 3),
            "exact-scalar-external" => PersistenceSamples.ExactScalar(metric: DistanceMetric.Cosine, rescoreDepth: 3, fullVectors: FullVectorLocation.ExternalSource),
            "graph-scalar" => PersistenceSamples.ScalarGraph(count: 16, dimension: 3),
            "graph-scalar-full" => PersistenceSamples.ScalarGraph(count: 16, dimension: 3, metric: DistanceMetric.Cosine, rescoreDepth: 5),
            "graph-scalar-external" => PersistenceSamples.ScalarGraph(count: 16, dimension: 3, metric: DistanceMetric.Cosine, rescoreDepth: 5, fullVectors: FullVectorLocation.ExternalSource),
            _ => throw new ArgumentOutOfRangeException(nameof(name), name, "not a sample"),
        };
        return IndexFileBytes.Save(index);
    }

    // The same sections behind a replacement header (re-aligned and re-checksummed).
    private static byte[] WithHeaderBytes(byte[] file, byte[] headerBytes)
    {
        IndexHeader original = IndexFileBytes.Header(file);
        byte[] composed = IndexFileBytes.Compose(original, IndexFileBytes.Payloads(file));
        int oldLength = IndexFileBytes.HeaderLength(composed);
        var result = new byte[16 + headerBytes.Length + 8];
        composed.AsSpan(0, 16).CopyTo(result);
        BinaryPrimitives.WriteInt32LittleEndian(result.AsSpan(12), headerBytes.Length);
        headerBytes.CopyTo(result, 16);
        IndexFileBytes.FixChecksums(result);
        return [.. result, .. composed.AsSpan(16 + oldLength + 8)];
    }
}

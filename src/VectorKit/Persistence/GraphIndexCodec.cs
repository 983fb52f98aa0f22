using System.Runtime.InteropServices;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Quantization;
using VectorKit.Internal;

namespace VectorKit.Persistence;

/// <summary>
/// The graph index: its options and entry point as header fields; sections ids, node levels, removal flags,
/// bottom-layer links, upper-layer links and vectors, in that order. Under 8-bit codes the vectors section is replaced
/// by the scalar ranges and the codes, followed by the vectors only when the full vectors are kept in memory for
/// re-scoring; a graph re-scoring from an external source records that in the field <c>full-vector-location</c> (1)
/// and stores no vectors. Last, from format version 5, the id order of the live slots (for mapped opening). From
/// version 6 the upper-layer starts follow the upper-layer links (derived from the levels, for mapped opening).
/// </summary>
internal sealed partial class GraphIndexCodec : IndexCodec
{
    private const string LinksPerNode = "links-per-node";
    private const string BottomLayerLinks = "bottom-layer-links";
    private const string BuildWidth = "build-width";
    private const string SearchWidth = "default-search-width";
    private const string Seed = "seed";
    private const string MaxDegreeOfParallelism = "build-parallelism";
    private const string FilteredExactScanFraction = "filtered-exact-scan-fraction";
    private const string EntrySlot = "entry-slot";
    private const string EntryLevel = "entry-level";

    // Written only when not at their defaults (float32, no re-scoring), so float32 files keep the bytes of version 1.
    private const string VectorStorageField = "vector-storage";
    private const string RescoreDepth = "rescore-depth";
    private const string Trained = "trained";
    private const int CodeBlockBytes = 1 << 20;

    // Upper-layer starts written or checked per block (on the stack).
    private const int StartsBlock = 1024;

    public override IndexKind Kind => IndexKind.Graph;

    public override Type IndexType => typeof(GraphIndex);

    public override void Save(IVectorIndex index, IndexFileWriter writer)
    {
        ((GraphIndex)index).ExportParts(parts =>
        {
            GraphIndexOptions options = parts.Options;
            int slots = parts.Slots;
            var header = new IndexHeader { Kind = Kind, Metric = parts.Metric, Dimension = parts.Dimension, Count = parts.Count, Rows = slots };
            header.Integers[LinksPerNode] = options.LinksPerNode;
            header.Integers[BottomLayerLinks] = options.BottomLayerLinks ?? 0;
            header.Integers[BuildWidth] = options.BuildWidth;
            header.Integers[SearchWidth] = options.SearchWidth;
            header.Integers[Seed] = options.Seed;
            header.Integers[MaxDegreeOfParallelism] = options.MaxDegreeOfParallelism;
            // Absent means "chosen by the cost model" (the default).
            if (options.FilteredExactScanFraction is double fraction)
            {
                header.Reals[FilteredExactScanFraction] = fraction;
            }
            header.Integers[EntrySlot] = parts.EntrySlot;
            header.Integers[EntryLevel] = parts.EntryLevel;
            bool codes = options.Encoding == VectorEncoding.Scalar8Bit;
            if (codes)
            {
                header.Integers[VectorStorageField] = (int)options.Encoding;
                header.Integers[Trained] = parts.ScalarRanges is null ? 0 : 1;

                // Only under codes (float32 rows are the full vectors), and only when external: other files keep their bytes.
                WriteFullVectorLocation(header, options.FullVectors);
            }

            if (options.RescoreDepth != 0)
            {
                header.Integers[RescoreDepth] = options.RescoreDepth;
            }

            header.Sections.Add(new SectionEntry((uint)SectionId.Ids, 0, checked((long)slots * sizeof(long))));
            header.Sections.Add(new SectionEntry((uint)SectionId.NodeLevels, 0, slots));
            header.Sections.Add(new SectionEntry((uint)SectionId.RemovedFlags, 0, slots));
            header.Sections.Add(new SectionEntry((uint)SectionId.BottomLinks, 0, checked((long)parts.BottomLinks.Length * sizeof(int))));
            header.Sections.Add(new SectionEntry((uint)SectionId.UpperLinks, 0, checked((long)parts.UpperLinks.Length * sizeof(int))));
            header.Sections.Add(new SectionEntry((uint)SectionId.UpperLinkStarts, 0, checked((long)slots * sizeof(int))));
            if (codes)
            {
                header.Sections.Add(new SectionEntry((uint)SectionId.ScalarRanges, 0, checked((long)(parts.ScalarRanges?.Length ?? 0) * sizeof(float))));
                header.Sections.Add(new SectionEntry((uint)SectionId.ScalarCodes, 0, checked((long)slots * parts.Codes!.Dimension)));
            }

            if (parts.Vectors is not null)
            {
                header.Sections.Add(new SectionEntry((uint)SectionId.Vectors, 0, checked((long)slots * parts.Dimension * sizeof(float))));
            }

            AddIdOrder(header, parts.Count);
            writer.WriteHeader(header);
            writer.BeginSection(SectionId.Ids);
            writer.Write<long>(parts.Ids.Span[..slots]);
            writer.EndSection();
            writer.BeginSection(SectionId.NodeLevels);
            writer.Write<byte>(parts.Levels.Span);
            writer.EndSection();
            writer.BeginSection(SectionId.RemovedFlags);
            writer.Write<byte>(parts.Removed.Span[..slots]);
            writer.EndSection();
            writer.BeginSection(SectionId.BottomLinks);
            writer.Write<int>(parts.BottomLinks.Span);
            writer.EndSection();
            writer.BeginSection(SectionId.UpperLinks);
            writer.Write<int>(parts.UpperLinks.Span);
            writer.EndSection();
            writer.BeginSection(SectionId.UpperLinkStarts);
            WriteUpperStarts(writer, parts.Levels.Span[..slots], options.LinksPerNode + 1);
            writer.EndSection();
            if (codes)
            {
                writer.BeginSection(SectionId.ScalarRanges);
                writer.Write<float>(parts.ScalarRanges ?? []);
                writer.EndSection();
                writer.BeginSection(SectionId.ScalarCodes);
                WriteCodes(writer, parts.Codes!, slots);
                writer.EndSection();
            }

            if (parts.Vectors is not null)
            {
                writer.BeginSection(SectionId.Vectors);
                FileBlocks.WriteRows(writer, parts.Vectors, slots);
                writer.EndSection();
            }

            WriteIdOrder(writer, parts.Ids.Span[..slots], parts.Removed.Span[..slots]);
            writer.Finish();
            return 0;
        });
    }

    // What the header says about the stored graph: shared by a load and a mapped opening.
    private readonly record struct Layout(GraphIndexOptions Options, int Slots, bool Codes, bool Trained, bool KeepsFull, int EntrySlot, int EntryLevel);

    private static Layout ReadLayout(IndexHeader header, int maxLinks)
    {
        int slots = (int)header.Rows;
        int links = (int)header.Integer(LinksPerNode, 2, maxLinks);
        int bottom = (int)header.Integer(BottomLayerLinks, 0, maxLinks);
        if (bottom == 1)
        {
            throw IndexHeader.Malformed($"the field '{BottomLayerLinks}' is 1; expected 0 (the default) or 2 to {maxLinks}");
        }

        int parallelism = (int)header.Integer(MaxDegreeOfParallelism, -1, int.MaxValue);

        // Optional: absent in files written before 8-bit storage existed, and whenever they are at their defaults.
        var storage = header.Integers.ContainsKey(VectorStorageField)
            ? (VectorEncoding)header.Integer(VectorStorageField, (int)VectorEncoding.Float32, (int)VectorEncoding.Scalar8Bit)
            : VectorEncoding.Float32;
        int rescoreDepth = header.Integers.ContainsKey(RescoreDepth) ? (int)header.Integer(RescoreDepth, 0, 100_000) : 0;
        bool codes = storage == VectorEncoding.Scalar8Bit;
        FullVectorLocation location = ReadFullVectorLocation(header);
        bool trained = !codes || header.Integer(Trained, 0, 1) == 1;
        if (!trained && (slots != 0 || header.Count != 0))
        {
            throw IndexHeader.Malformed($"an untrained 8-bit graph holds no vectors, but it declares {slots} slots");
        }

        var options = new GraphIndexOptions
        {
            LinksPerNode = links,
            BottomLayerLinks = bottom == 0 ? null : bottom,
            BuildWidth = (int)header.Integer(BuildWidth, 1, 100_000),
            SearchWidth = (int)header.Integer(SearchWidth, 1, 100_000),
            Seed = (int)header.Integer(Seed, int.MinValue, int.MaxValue),
            MaxDegreeOfParallelism = parallelism == 0 ? -1 : parallelism,
            // Optional: absent means the options' default (a writer omits it when the option is left at its default).
            FilteredExactScanFraction = header.Reals.ContainsKey(FilteredExactScanFraction)
                ? header.Real(FilteredExactScanFraction, 0, 1)
                : null,
            Encoding = storage,
            RescoreDepth = rescoreDepth,
            FullVectors = location,
        };
        if (parallelism == 0)
        {
            throw IndexHeader.Malformed($"the field '{MaxDegreeOfParallelism}' is 0; expected -1 or a positive thread count");
        }

        if (options.EffectiveBottomLayerLinks > maxLinks)
        {
            throw IndexHeader.Malformed($"the bottom layer allows {options.EffectiveBottomLayerLinks} links per node; the load options allow {maxLinks} ({nameof(IndexLoadOptions.MaxLinksPerNode)})");
        }

        int entrySlot = (int)header.Integer(EntrySlot, -1, Math.Max(-1, slots - 1));
        int entryLevel = (int)header.Integer(EntryLevel, 0, GraphIndexParts.MaxNodeLevel);
        bool keepsFull = !codes || (rescoreDepth > 0 && location == FullVectorLocation.InIndexMemory);
        return new Layout(options, slots, codes, trained, keepsFull, entrySlot, entryLevel);
    }

    public override IVectorIndex Load(IndexHeader header, IndexFileReader reader)
    {
        (GraphIndexOptions options, int slots, bool codes, bool trained, bool keepsFull, int entrySlot, int entryLevel) = ReadLayout(header, reader.Options.MaxLinksPerNode);
        int links = options.LinksPerNode;

        reader.OpenSection(SectionId.Ids);
        long[] ids = reader.ReadArray<long>(slots);
        reader.CloseSection();
        reader.OpenSection(SectionId.NodeLevels);
        byte[] levels = reader.ReadArray<byte>(slots);
        reader.CloseSection();
        reader.OpenSection(SectionId.RemovedFlags);
        byte[] removed = reader.ReadArray<byte>(slots);
        reader.CloseSection();
        reader.OpenSection(SectionId.BottomLinks);
        int[] bottomLinks = reader.ReadArray<int>(checked(slots * (options.EffectiveBottomLayerLinks + 1)));
        reader.CloseSection();

        long upperInts = 0;
        foreach (byte level in levels)
        {
            if (level > GraphIndexParts.MaxNodeLevel)
            {
                throw new IndexFileException(
                    $"Index file section 'NodeLevels' is invalid: a node has level {level}; the most is {GraphIndexParts.MaxNodeLevel}.", "NodeLevels", -1);
            }

            upperInts += (long)level * (links + 1);
        }

        reader.OpenSection(SectionId.UpperLinks);
        if (upperInts > int.MaxValue)
        {
            throw reader.SectionProblem($"the levels require {upperInts} upper-layer link ints, more than one array holds");
        }

        int[] upperLinks = reader.ReadArray<int>((int)upperInts);
        reader.CloseSection();
        if (header.Sections.Exists(s => s.Id == (uint)SectionId.UpperLinkStarts))
        {
            CheckUpperStarts(reader, levels, links + 1);
        }

        float[]? ranges = null;
        CodeBuffer? codeRows = null;
        VectorBuffer? vectors = null;
        try
        {
            if (codes)
            {
                reader.OpenSection(SectionId.ScalarRanges);
                ranges = reader.ReadArray<float>(trained ? 2 * header.Dimension : 0);
                reader.CloseSection();
                reader.OpenSection(SectionId.ScalarCodes);
                codeRows = ReadCodes(reader, header.Dimension, slots);
                reader.CloseSection();
            }

            if (keepsFull)
            {
                reader.OpenSection(SectionId.Vectors);
                vectors = new VectorBuffer(header.Dimension, 0);
                reader.ReadRows(vectors, slots);
                reader.CloseSection();
            }
        }
        catch
        {
            codeRows?.Dispose();
            vectors?.Dispose();
            throw;
        }

        SkipIdOrder(header, reader, header.Count);
        var parts = new GraphIndexParts
        {
            Dimension = header.Dimension,
            Metric = header.Metric,
            Options = options,
            Slots = slots,
            Count = (int)header.Count,
            Ids = ids,
            Removed = removed,
            Levels = levels,
            BottomLinks = bottomLinks,
            UpperLinks = upperLinks,
            Vectors = vectors,
            Codes = codeRows,
            ScalarRanges = trained && codes ? ranges : null,
            EntrySlot = entrySlot,
            EntryLevel = entryLevel,
        };
        try
        {
            return GraphIndex.FromParts(parts);
        }
        catch (InvalidDataException e)
        {
            throw new IndexFileException($"Index file holds an invalid graph: {e.Message}.", "graph", -1, e);
        }
    }

    // Each slot's start in the upper-layer section (SectionId.UpperLinkStarts), a block of slots at a time.
    private static void WriteUpperStarts(IndexFileWriter writer, ReadOnlySpan<byte> levels, int upperStride)
    {
        Span<int> block = stackalloc int[StartsBlock];
        int at = 0;
        for (int first = 0; first < levels.Length; first += StartsBlock)
        {
            int n = Math.Min(StartsBlock, levels.Length - first);
            for (int i = 0; i < n; i++)
            {
                block[i] = at;
                at = checked(at + (levels[first + i] * upperStride));
            }

            writer.Write<int>(block[..n]);
        }
    }

    // A load derives the starts from the levels itself: the stored column is read through its checksum and must equal
    // them, so that a file never opens mapped into another graph than it loads into.
    private static void CheckUpperStarts(IndexFileReader reader, ReadOnlySpan<byte> levels, int upperStride)
    {
        reader.OpenSection(SectionId.UpperLinkStarts);
        reader.ExpectPayload(checked((long)levels.Length * sizeof(int)));
        Span<int> block = stackalloc int[StartsBlock];
        long at = 0;
        string? problem = null;
        for (int first = 0; first < levels.Length; first += StartsBlock)
        {
            int n = Math.Min(StartsBlock, levels.Length - first);
            reader.Read(block[..n]);
            for (int i = 0; i < n; i++)
            {
                if (problem is null && block[i] != at)
                {
                    problem = StartProblem(first + i, block[i], at);
                }

                at += levels[first + i] * upperStride;
            }
        }

        reader.CloseSection();
        if (problem is not null)
        {
            throw reader.SectionProblem(problem);
        }
    }

    /// <summary>The message for a stored upper-layer start that differs from the levels' running total.</summary>
    internal static string StartProblem(int slot, int stored, long expected)
        => $"slot {slot} starts at int {stored} of the upper-layer links; the levels of the slots before it put it at {expected}";

    // Codes in blocks of about 1 MiB (a code buffer may exceed one span's reach).
    private static void WriteCodes(IndexFileWriter writer, CodeBuffer codes, int rows)
    {
        int size = codes.Dimension;
        int blockRows = Math.Max(1, CodeBlockBytes / size);
        for (int start = 0; start < rows; start += blockRows)
        {
            int n = Math.Min(blockRows, rows - start);
            writer.Write<byte>(MemoryMarshal.CreateReadOnlySpan(ref codes.Row(start), n * size));
        }
    }

    // Reads `rows` codes of the open section, block by block (growing only as data arrives). Their padding is checked
    // by GraphIndex.FromParts, after the checksum.
    private static CodeBuffer ReadCodes(IndexFileReader reader, int dimension, int rows)
    {
        int size = ScalarQuantizer.PaddedLength(dimension);
        reader.ExpectPayload(checked((long)rows * size));
        var codes = new CodeBuffer(size, 0);
        try
        {
            int blockRows = Math.Max(1, CodeBlockBytes / size);
            for (int start = 0; start < rows; start += blockRows)
            {
                int n = Math.Min(blockRows, rows - start);
                if (codes.Capacity < start + n)
                {
                    // A known length was checked against the declared sizes: allocate once; otherwise grow with the data.
                    codes.Resize(reader.LengthKnown ? rows : (int)Math.Min(rows, Math.Max(start + n, 2L * codes.Capacity)));
                }

                Span<byte> block = MemoryMarshal.CreateSpan(ref codes.Row(start), n * size);
                reader.Read(block);
            }

            return codes;
        }
        catch
        {
            codes.Dispose();
            throw;
        }
    }
}

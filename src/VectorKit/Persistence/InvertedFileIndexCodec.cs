using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Quantization;
using VectorKit.Internal;

namespace VectorKit.Persistence;

/// <summary>
/// The inverted-file index: its options and whether it is trained as header fields; sections centroids, the
/// quantizer (product codebooks, four-bit codebooks under the fast-scan layout, or scalar ranges, under compressed storage), list lengths, ids, list codes and the
/// full vectors (when kept in memory), in that order; an index reading full vectors from an external source records
/// that in the field <c>full-vector-location</c> and stores no vectors. Entries are stored in list order; an untrained index stores empty
/// centroid and quantizer sections and no entries.
/// </summary>
internal sealed partial class InvertedFileIndexCodec : IndexCodec
{
    private const string ListCount = "list-count";
    private const string SearchWidth = "lists-probed";
    private const string Storage = "list-storage";

    // The file's numbers for the list encodings (format version 1), fixed whatever the enum's order.
    private static readonly VectorEncoding[] s_listEncodings = [VectorEncoding.Float32, VectorEncoding.ProductCodes, VectorEncoding.Scalar8Bit];
    private const string ProductCodeBytes = "product-code-bytes";
    private const string RescoreDepth = "rescore-depth";
    private const string MaxIterations = "training-iterations";
    private const string SampleSize = "training-sample-size";
    private const string Seed = "seed";
    private const string MaxDegreeOfParallelism = "training-parallelism";
    private const string Trained = "trained";

    // Optional (files written before rotations existed lack it): absent means no rotation.
    private const string ProductRotation = "product-rotation";

    // Optional: absent means ProductCodeLayout.BytePerSubspace (files from before the fast-scan layout).
    private const string ProductLayout = "product-code-layout";

    public override IndexKind Kind => IndexKind.InvertedFile;

    public override Type IndexType => typeof(InvertedFileIndex);

    public override void Save(IVectorIndex index, IndexFileWriter writer)
    {
        var inverted = (InvertedFileIndex)index;
        int codeBytes = inverted.CodeBytesPerVector;
        inverted.ExportParts(parts =>
        {
            InvertedFileOptions options = parts.Options;
            int d = parts.Dimension;
            int count = parts.Count;
            var header = new IndexHeader { Kind = Kind, Metric = parts.Metric, Dimension = d, Count = count, Rows = count };
            header.Integers[ListCount] = options.ListCount;
            header.Integers[SearchWidth] = options.SearchWidth;
            header.Integers[Storage] = Array.IndexOf(s_listEncodings, options.Encoding);
            header.Integers[ProductCodeBytes] = options.ProductCodeBytes;
            header.Integers[RescoreDepth] = options.RescoreDepth;
            header.Integers[MaxIterations] = options.MaxIterations;
            // 0 stands for "not set" (64 rows per list).
            header.Integers[SampleSize] = options.SampleSize ?? 0;
            header.Integers[Seed] = options.Seed;
            header.Integers[MaxDegreeOfParallelism] = options.MaxDegreeOfParallelism;
            header.Integers[Trained] = parts.Trained ? 1 : 0;
            WriteFullVectorLocation(header, options.FullVectors);

            if (options.ProductCodeRotation != SubspaceRotation.None)
            {
                // Written only when set, so files without a rotation stay byte-identical to (and loadable by) older readers.
                header.Integers[ProductRotation] = (int)options.ProductCodeRotation;
            }

            bool fourBit = options.Encoding == VectorEncoding.ProductCodes && options.ProductCodeLayout == ProductCodeLayout.FourBitFastScan;
            if (options.ProductCodeLayout != ProductCodeLayout.BytePerSubspace)
            {
                // Written only when set, as the rotation: files of the byte layout stay as they were.
                header.Integers[ProductLayout] = (int)options.ProductCodeLayout;
            }

            bool rotated = options.Encoding == VectorEncoding.ProductCodes && options.ProductCodeRotation != SubspaceRotation.None;
            header.Sections.Add(new SectionEntry((uint)SectionId.Centroids, 0, checked((long)parts.Centroids.Length * sizeof(float))));
            if (options.Encoding == VectorEncoding.ProductCodes)
            {
                header.Sections.Add(fourBit
                    ? new SectionEntry((uint)SectionId.FourBitCodebooks, 0, checked((long)(parts.FourBitCodewords?.Length ?? 0) * sizeof(float)))
                    : new SectionEntry((uint)SectionId.ProductCodebooks, 0, checked((long)(parts.ProductCodewords?.Length ?? 0) * sizeof(float))));

                // Not skippable: a reader that ignored the rotation would misread every code.
                if (rotated)
                {
                    header.Sections.Add(new SectionEntry((uint)SectionId.ProductRotation, 0, checked((long)(parts.ProductRotation?.Length ?? 0) * sizeof(float))));
                }
            }
            else if (options.Encoding == VectorEncoding.Scalar8Bit)
            {
                header.Sections.Add(new SectionEntry((uint)SectionId.ScalarRanges, 0, checked((long)(parts.ScalarRanges?.Length ?? 0) * sizeof(float))));
            }

            header.Sections.Add(new SectionEntry((uint)SectionId.ListLengths, 0, checked((long)parts.ListLengths.Length * sizeof(int))));
            header.Sections.Add(new SectionEntry((uint)SectionId.Ids, 0, checked((long)count * sizeof(long))));
            header.Sections.Add(fourBit
                ? new SectionEntry((uint)SectionId.FastScanBlocks, 0, FastScanBlockBytes(parts.ListLengths, codeBytes))
                : new SectionEntry((uint)SectionId.ListCodes, 0, checked((long)count * codeBytes)));
            if (parts.FullVectors is not null)
            {
                header.Sections.Add(new SectionEntry((uint)SectionId.Vectors, 0, checked((long)count * d * sizeof(float))));
            }

            AddIdOrder(header, count);

            writer.WriteHeader(header);
            writer.BeginSection(SectionId.Centroids);
            writer.Write<float>(parts.Centroids);
            writer.EndSection();
            if (options.Encoding == VectorEncoding.ProductCodes)
            {
                writer.BeginSection(fourBit ? SectionId.FourBitCodebooks : SectionId.ProductCodebooks);
                writer.Write<float>(fourBit ? parts.FourBitCodewords : parts.ProductCodewords);
                writer.EndSection();
                if (rotated)
                {
                    writer.BeginSection(SectionId.ProductRotation);
                    writer.Write<float>(parts.ProductRotation);
                    writer.EndSection();
                }
            }
            else if (options.Encoding == VectorEncoding.Scalar8Bit)
            {
                writer.BeginSection(SectionId.ScalarRanges);
                writer.Write<float>(parts.ScalarRanges);
                writer.EndSection();
            }

            writer.BeginSection(SectionId.ListLengths);
            writer.Write<int>(parts.ListLengths);
            writer.EndSection();
            writer.BeginSection(SectionId.Ids);
            writer.Write<long>(parts.Ids);
            writer.EndSection();
            if (fourBit)
            {
                WriteFastScanBlocks(writer, parts, codeBytes);
            }
            else
            {
                writer.BeginSection(SectionId.ListCodes);
                for (int list = 0; list < parts.ListLengths.Length; list++)
                {
                    writer.Write(parts.CodesOf(list)[..checked(parts.ListLengths[list] * codeBytes)]);
                }

                writer.EndSection();
            }

            if (parts.FullVectors is VectorBuffer full)
            {
                writer.BeginSection(SectionId.Vectors);
                foreach (int row in parts.FullRowOrder!)
                {
                    writer.Write<float>(full.RowSpan(row));
                }

                writer.EndSection();
            }

            WriteIdOrder(writer, parts.Ids);
            writer.Finish();
            return 0;
        });
    }

    /// <summary>The options, whether trained, and the code bytes per entry, from the header; checked against the dimension.</summary>
    private static (InvertedFileOptions Options, bool Trained, int CodeBytes) ReadOptions(IndexHeader header)
    {
        if (header.Count != header.Rows)
        {
            throw IndexHeader.Malformed($"an inverted file stores only live entries, but it declares {header.Count} items in {header.Rows} rows");
        }

        int d = header.Dimension;
        int count = (int)header.Count;
        int lists = (int)header.Integer(ListCount, 1, 1 << 20);
        VectorEncoding storage = s_listEncodings[(int)header.Integer(Storage, 0, s_listEncodings.Length - 1)];
        int productCodeBytes = (int)header.Integer(ProductCodeBytes, 1, 4096);
        int parallelism = (int)header.Integer(MaxDegreeOfParallelism, -1, int.MaxValue);
        if (parallelism == 0)
        {
            throw IndexHeader.Malformed($"the field '{MaxDegreeOfParallelism}' is 0; expected -1 or a positive thread count");
        }

        int sampleSize = (int)header.Integer(SampleSize, 0, int.MaxValue);
        FullVectorLocation location = ReadFullVectorLocation(header);
        var rotation = header.Integers.ContainsKey(ProductRotation)
            ? (SubspaceRotation)header.Integer(ProductRotation, (int)SubspaceRotation.None, (int)SubspaceRotation.VarianceBalanced)
            : SubspaceRotation.None;
        var layout = header.Integers.ContainsKey(ProductLayout)
            ? (ProductCodeLayout)header.Integer(ProductLayout, (int)ProductCodeLayout.BytePerSubspace, (int)ProductCodeLayout.FourBitFastScan)
            : ProductCodeLayout.BytePerSubspace;
        var options = new InvertedFileOptions
        {
            ProductCodeLayout = layout,
            ListCount = lists,
            SearchWidth = (int)header.Integer(SearchWidth, 1, int.MaxValue),
            Encoding = storage,
            ProductCodeBytes = productCodeBytes,
            RescoreDepth = (int)header.Integer(RescoreDepth, 0, VectorIndexOptions.MaxRescoreDepth),
            MaxIterations = (int)header.Integer(MaxIterations, 0, 10_000),
            SampleSize = sampleSize == 0 ? null : sampleSize,
            Seed = (int)header.Integer(Seed, int.MinValue, int.MaxValue),
            MaxDegreeOfParallelism = parallelism,
            FullVectors = location,
            ProductCodeRotation = rotation,
        };
        bool trained = header.Integer(Trained, 0, 1) == 1;
        if (!trained && count != 0)
        {
            throw IndexHeader.Malformed($"an untrained inverted file holds no vectors, but it declares {count}");
        }

        bool fourBit = storage == VectorEncoding.ProductCodes && layout == ProductCodeLayout.FourBitFastScan;
        if (fourBit && !FourBitQuantizer.Fits(productCodeBytes, d))
        {
            throw IndexHeader.Malformed($"the field '{ProductCodeBytes}' is {productCodeBytes}, whose {2 * productCodeBytes} four-bit sub-spaces do not divide the dimension {d}");
        }

        if (storage == VectorEncoding.ProductCodes && d % productCodeBytes != 0)
        {
            throw IndexHeader.Malformed($"the field '{ProductCodeBytes}' is {productCodeBytes}, which does not divide the dimension {d}");
        }

        int codeBytes = storage switch
        {
            VectorEncoding.Float32 => checked(d * sizeof(float)),
            VectorEncoding.ProductCodes => productCodeBytes,
            _ => ScalarQuantizer.PaddedLength(d),
        };
        return (options, trained, codeBytes);
    }

    public override IVectorIndex Load(IndexHeader header, IndexFileReader reader)
    {
        (InvertedFileOptions options, bool trained, int codeBytes) = ReadOptions(header);
        int d = header.Dimension;
        int count = (int)header.Count;
        int lists = options.ListCount;
        VectorEncoding storage = options.Encoding;
        SubspaceRotation rotation = options.ProductCodeRotation;
        bool fourBit = options.UsesFastScan;
        bool keepsFull = options.KeepsFullVectorsInMemory;

        reader.OpenSection(SectionId.Centroids);
        float[] centroids = reader.ReadArray<float>(trained ? checked(lists * d) : 0);
        reader.CloseSection();
        float[]? codewords = null;
        float[]? fourBitCodewords = null;
        float[]? rotationMatrix = null;
        float[]? ranges = null;
        if (storage == VectorEncoding.ProductCodes)
        {
            if (fourBit)
            {
                reader.OpenSection(SectionId.FourBitCodebooks);
                fourBitCodewords = reader.ReadArray<float>(trained ? checked(d * FourBitQuantizer.CodewordsPerSubspace) : 0);
            }
            else
            {
                reader.OpenSection(SectionId.ProductCodebooks);
                codewords = reader.ReadArray<float>(trained ? checked(d * ProductQuantizer.CodewordsPerSubspace) : 0);
            }

            reader.CloseSection();
            if (rotation != SubspaceRotation.None)
            {
                reader.OpenSection(SectionId.ProductRotation);
                rotationMatrix = reader.ReadArray<float>(trained ? checked(d * d) : 0);
                reader.CloseSection();
            }
        }
        else if (storage == VectorEncoding.Scalar8Bit)
        {
            reader.OpenSection(SectionId.ScalarRanges);
            ranges = reader.ReadArray<float>(trained ? 2 * d : 0);
            reader.CloseSection();
        }

        reader.OpenSection(SectionId.ListLengths);
        int[] lengths = reader.ReadArray<int>(lists);
        reader.CloseSection();

        // The lengths decide every later allocation, so they are checked against the count before anything else.
        long total = 0;
        for (int list = 0; list < lists; list++)
        {
            if (lengths[list] < 0)
            {
                throw reader.SectionProblem($"list {list} has length {lengths[list]}");
            }

            total += lengths[list];
        }

        if (total != count)
        {
            throw reader.SectionProblem($"the list lengths add up to {total}, but the header declares {count} vectors");
        }

        reader.OpenSection(SectionId.Ids);
        long[] ids = reader.ReadArray<long>(count);
        reader.CloseSection();
        // Fast-scan codes come as the search's blocks (format version 4) or one code after another (older files).
        bool packed = fourBit && header.Sections.Exists(s => s.Id == (uint)SectionId.FastScanBlocks);
        reader.OpenSection(packed ? SectionId.FastScanBlocks : SectionId.ListCodes);
        reader.ExpectPayload(packed ? FastScanBlockBytes(lengths, codeBytes) : checked((long)count * codeBytes));
        var codes = new byte[lists][];
        for (int list = 0; list < lists; list++)
        {
            long bytes = packed ? FastScanKernel.ListBytes(lengths[list], codeBytes) : (long)lengths[list] * codeBytes;
            codes[list] = lengths[list] == 0 ? [] : reader.ReadPart<byte>(checked((int)bytes));
        }

        reader.CloseSection();
        VectorBuffer? full = null;
        if (keepsFull)
        {
            reader.OpenSection(SectionId.Vectors);
            full = new VectorBuffer(d, 0);
            try
            {
                reader.ReadRows(full, count);
                reader.CloseSection();
            }
            catch
            {
                full.Dispose();
                throw;
            }
        }

        try
        {
            SkipIdOrder(header, reader);
        }
        catch
        {
            full?.Dispose();
            throw;
        }

        var parts = new InvertedFileIndexParts
        {
            Dimension = d,
            Metric = header.Metric,
            Options = options,
            Trained = trained,
            Count = count,
            Centroids = centroids,
            ProductCodewords = trained ? codewords : null,
            FourBitCodewords = trained ? fourBitCodewords : null,
            ProductRotation = trained ? rotationMatrix : null,
            ScalarRanges = trained ? ranges : null,
            ListLengths = lengths,
            ListCodes = codes,
            Ids = ids,
            FullVectors = full,
            ListCodesPacked = packed,
        };
        try
        {
            return InvertedFileIndex.FromParts(parts);
        }
        catch (InvalidDataException e)
        {
            throw new IndexFileException($"Index file holds an invalid inverted file: {e.Message}.", "inverted file", -1, e);
        }
    }

    /// <summary>Bytes of the <see cref="SectionId.FastScanBlocks"/> section: every list in whole blocks.</summary>
    private static long FastScanBlockBytes(int[] lengths, int codeBytes)
    {
        long bytes = 0;
        foreach (int length in lengths)
        {
            bytes = checked(bytes + FastScanKernel.ListBytes(length, codeBytes));
        }

        return bytes;
    }

    // Every list's blocks as the search reads them; the unused slots of a last partial block are written as zeros
    // (in memory they may hold a removed entry's code), so the bytes depend on the entries only.
    private static void WriteFastScanBlocks(IndexFileWriter writer, InvertedFileIndexParts parts, int codeBytes)
    {
        writer.BeginSection(SectionId.FastScanBlocks);
        int blockBytes = FastScanKernel.BlockSize * codeBytes;
        byte[] last = new byte[blockBytes];
        for (int list = 0; list < parts.ListLengths.Length; list++)
        {
            int length = parts.ListLengths[list];
            int whole = length / FastScanKernel.BlockSize;
            ReadOnlySpan<byte> blocks = parts.CodesOf(list);
            writer.Write(blocks[..(whole * blockBytes)]);
            int rest = length - (whole * FastScanKernel.BlockSize);
            if (rest > 0)
            {
                blocks.Slice(whole * blockBytes, blockBytes).CopyTo(last);
                for (int row = 0; row < codeBytes; row++)
                {
                    last.AsSpan((row * FastScanKernel.BlockSize) + rest, FastScanKernel.BlockSize - rest).Clear();
                }

                writer.Write(last);
            }
        }

        writer.EndSection();
    }
}

using System.Buffers.Binary;
using System.IO.Compression;
using System.Text;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.IO;
using VectorKit.Persistence;
using VectorKit.Quantization;

namespace VectorKit.Fuzz;

/// <summary>
/// Small valid inputs for every target, written with the library's own writers (or by hand where it has none), so a
/// campaign starts from files that reach deep into each parser. Small on purpose: afl mutates small files faster.
/// </summary>
internal static class Seeds
{
    public static void Write(string folder)
    {
        foreach ((string target, string name, byte[] bytes) in All())
        {
            string dir = Path.Combine(folder, target);
            Directory.CreateDirectory(dir);
            File.WriteAllBytes(Path.Combine(dir, name), bytes);
        }
    }

    private static IEnumerable<(string Target, string Name, byte[] Bytes)> All()
    {
        foreach ((string name, byte[] file) in IndexFiles())
        {
            yield return ("index", name, file);
            yield return ("index-raw", name, file);
            yield return ("index-mapped", name, file);
        }

        float[] data = Data(6, 3, 1);
        yield return ("npy", "float32.npy", Npy(s => NpyFile.Write(s, data, 3)));
        yield return ("npy", "int64.npy", Npy(s => NpyFile.Write(s, new long[] { 1, 2, 3, 4, 5, 6 }, 2)));
        yield return ("npy", "int32-big-endian.npy", NpyHeader("{'descr': '>i4', 'fortran_order': False, 'shape': (2, 2), }", BigEndianInts(1, 2, 3, 4)));
        yield return ("npy", "uint8-fortran.npy", NpyHeader("{'descr': '|u1', 'fortran_order': True, 'shape': (2, 3), }", [1, 2, 3, 4, 5, 6]));
        yield return ("npy", "float64-v2.npy", NpyHeader("{'descr': '<f8', 'fortran_order': False, 'shape': (1, 2), }", [.. BitConverter.GetBytes(1.5), .. BitConverter.GetBytes(-2.0)], version: 2));
        yield return ("npy", "float32-1d.npy", NpyHeader("{'descr': '<f4', 'fortran_order': False, 'shape': (3,), }", [.. BitConverter.GetBytes(1f), .. BitConverter.GetBytes(2f), .. BitConverter.GetBytes(3f)]));

        yield return ("fvecs", "rows.fvecs", Npy(s => VecsFile.WriteFvecs(s, data, 3)));
        yield return ("ivecs", "rows.ivecs", Npy(s => VecsFile.WriteIvecs(s, new[] { 1, 2, 3, 4, 5, 6 }, 3)));
        yield return ("bvecs", "rows.bvecs", Npy(s => VecsFile.WriteBvecs(s, new byte[] { 1, 2, 3, 4, 5, 6, 7, 8 }, 4)));

        byte[] images = Idx(0x08, [3, 2, 2], [.. Enumerable.Range(0, 12).Select(i => (byte)(i * 20))]);
        yield return ("idx", "images-ubyte.idx", images);
        yield return ("idx", "labels-ubyte.idx", Idx(0x08, [4], [1, 2, 3, 9]));
        yield return ("idx", "float.idx", Idx(0x0D, [2, 2], BigEndianFloats(1, 2, 3, 4)));
        yield return ("idx", "int.idx", Idx(0x0C, [2, 1], BigEndianInts(7, -7)));
        yield return ("idx", "short-double.idx", Idx(0x0B, [2], [0, 1, 0, 2]));
        yield return ("idx", "images-ubyte.idx.gz", Gzip(images));

        yield return ("csv", "plain.csv", Encoding.UTF8.GetBytes("1,2,3\n4.5,-6e3,NaN\n\n7, 8 ,Infinity\n"));
        yield return ("csv", "header.csv", Encoding.UTF8.GetBytes("a;b\n1;2\r\n3;-4\n"));

        yield return ("neighbors", "ids.npy", Npy(s => NpyFile.Write(s, new long[] { 3, 1, -1, 0, 2, 5 }, 3)));
        yield return ("neighbors", "ids-int32.npy", NpyHeader("{'descr': '<i4', 'fortran_order': False, 'shape': (2, 2), }", [.. BitConverter.GetBytes(1), .. BitConverter.GetBytes(0), .. BitConverter.GetBytes(2), .. BitConverter.GetBytes(-1)]));
        yield return ("neighbors", "ids.ivecs", Npy(s => VecsFile.WriteIvecs(s, new[] { 3, 1, 0, 2 }, 2)));

        yield return ("file-source", "rows.npy", Npy(s => NpyFile.Write(s, data, 3)));
        yield return ("file-source", "rows.fvecs", Npy(s => VecsFile.WriteFvecs(s, data, 3)));
        yield return ("file-source", "float64.npy", NpyHeader("{'descr': '<f8', 'fortran_order': False, 'shape': (1, 2), }", [.. BitConverter.GetBytes(1.5), .. BitConverter.GetBytes(-2.0)]));
    }

    // Every index kind and variant: exact float32/8-bit (full vectors in memory, external), graph float32/8-bit
    // (in memory, external), inverted file float32/product codes (plain, rotated)/8-bit (in memory, external),
    // untrained and empty indexes, each metric at least once.
    private static IEnumerable<(string Name, byte[] File)> IndexFiles()
    {
        float[] data = Data(10, 3, 2);
        long[] ids = [.. Enumerable.Range(0, 10).Select(i => 100L + (3 * i))];

        yield return ("exact.vkx", Save(Filled(new ExactIndex(3, DistanceMetric.SquaredEuclidean), ids, data)));
        yield return ("exact-cosine.vkx", Save(Filled(new ExactIndex(3, DistanceMetric.Cosine), ids, data)));
        yield return ("exact-scalar.vkx", Save(Trained(new ExactIndex(3, DistanceMetric.InnerProduct, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit }), ids, data)));
        yield return ("exact-scalar-full.vkx", Save(Trained(new ExactIndex(3, DistanceMetric.Cosine, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 3 }), ids, data)));
        yield return ("exact-scalar-external.vkx", Save(Trained(new ExactIndex(3, DistanceMetric.SquaredEuclidean, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 3, FullVectors = FullVectorLocation.ExternalSource }), ids, data)));

        GraphIndexOptions Graph(VectorEncoding encoding = VectorEncoding.Float32, int rescore = 0, FullVectorLocation location = FullVectorLocation.InIndexMemory)
            => new() { LinksPerNode = 2, BuildWidth = 8, Seed = 3, MaxDegreeOfParallelism = 1, Encoding = encoding, RescoreDepth = rescore, FullVectors = location };
        yield return ("graph.vkx", Save(Filled(new GraphIndex(3, DistanceMetric.SquaredEuclidean, Graph()), ids, data, remove: true)));
        yield return ("graph-inner-product.vkx", Save(Filled(new GraphIndex(3, DistanceMetric.InnerProduct, Graph()), ids, data)));
        yield return ("graph-empty.vkx", Save(new GraphIndex(3, DistanceMetric.Cosine, Graph())));
        yield return ("graph-scalar.vkx", Save(Trained(new GraphIndex(3, DistanceMetric.SquaredEuclidean, Graph(VectorEncoding.Scalar8Bit)), ids, data)));
        yield return ("graph-scalar-full.vkx", Save(Trained(new GraphIndex(3, DistanceMetric.Cosine, Graph(VectorEncoding.Scalar8Bit, 4)), ids, data)));
        yield return ("graph-scalar-external.vkx", Save(Trained(new GraphIndex(3, DistanceMetric.Cosine, Graph(VectorEncoding.Scalar8Bit, 4, FullVectorLocation.ExternalSource)), ids, data)));

        InvertedFileOptions Ivf(VectorEncoding encoding, int rescore = 0, FullVectorLocation location = FullVectorLocation.InIndexMemory, SubspaceRotation rotation = SubspaceRotation.None, int codeBytes = 2, ProductCodeLayout layout = ProductCodeLayout.BytePerSubspace)
            => new() { ProductCodeLayout = layout, ListCount = 3, SearchWidth = 2, Encoding = encoding, ProductCodeBytes = codeBytes, ProductCodeRotation = rotation, RescoreDepth = rescore, MaxIterations = 2, Seed = 5, MaxDegreeOfParallelism = 1, FullVectors = location };
        float[] ivfData = Data(10, 2, 4);
        float[] productSample = Data(256, 2, 5);
        yield return ("ivf-float32.vkx", Save(Trained(new InvertedFileIndex(2, DistanceMetric.SquaredEuclidean, Ivf(VectorEncoding.Float32)), ids, ivfData)));
        yield return ("ivf-scalar.vkx", Save(Trained(new InvertedFileIndex(2, DistanceMetric.Cosine, Ivf(VectorEncoding.Scalar8Bit, 3)), ids, ivfData)));
        yield return ("ivf-scalar-external.vkx", Save(Trained(new InvertedFileIndex(2, DistanceMetric.SquaredEuclidean, Ivf(VectorEncoding.Scalar8Bit, 3, FullVectorLocation.ExternalSource)), ids, ivfData)));
        yield return ("ivf-product.vkx", Save(Trained(new InvertedFileIndex(2, DistanceMetric.InnerProduct, Ivf(VectorEncoding.ProductCodes, 2)), ids, ivfData, productSample)));
        yield return ("ivf-product-rotated.vkx", Save(Trained(new InvertedFileIndex(2, DistanceMetric.SquaredEuclidean, Ivf(VectorEncoding.ProductCodes, 0, rotation: SubspaceRotation.VarianceBalanced, codeBytes: 1)), ids, ivfData, productSample)));
        yield return ("ivf-fast-scan.vkx", Save(Trained(new InvertedFileIndex(2, DistanceMetric.SquaredEuclidean, Ivf(VectorEncoding.ProductCodes, 3, codeBytes: 1, layout: ProductCodeLayout.FourBitFastScan)), ids, ivfData, productSample)));
        yield return ("ivf-untrained.vkx", Save(new InvertedFileIndex(2, DistanceMetric.InnerProduct, Ivf(VectorEncoding.Scalar8Bit, 2))));
    }

    private static T Filled<T>(T index, long[] ids, float[] data, bool remove = false)
        where T : IVectorIndex
    {
        index.AddRange(ids, data);
        if (remove)
        {
            index.Remove(ids[1]);
        }

        return index;
    }

    private static T Trained<T>(T index, long[] ids, float[] data, float[]? sample = null)
        where T : ITrainableIndex
    {
        index.Train(sample ?? data);
        index.AddRange(ids, data);
        index.Remove(ids[2]);
        return index;
    }

    private static byte[] Save(IVectorIndex index)
    {
        using (index)
        {
            var stream = new MemoryStream();
            IndexFile.Save(index, stream);
            return stream.ToArray();
        }
    }

    private static float[] Data(int count, int dimension, int seed)
    {
        var random = new Random(seed);
        return [.. Enumerable.Range(0, count * dimension).Select(i => (float)Math.Round((random.NextDouble() * 4) - 2 + (i % dimension), 3))];
    }

    private static byte[] Npy(Action<Stream> write)
    {
        var stream = new MemoryStream();
        write(stream);
        return stream.ToArray();
    }

    private static byte[] NpyHeader(string dict, byte[] payload, int version = 1)
    {
        int prefix = version == 1 ? 10 : 12;
        int total = (prefix + dict.Length + 1 + 63) / 64 * 64;
        string padded = dict.PadRight(total - prefix - 1) + "\n";
        var output = new List<byte> { 0x93 };
        output.AddRange("NUMPY"u8.ToArray());
        output.Add((byte)version);
        output.Add(0);
        if (version == 1)
        {
            output.AddRange(BitConverter.GetBytes((ushort)padded.Length));
        }
        else
        {
            output.AddRange(BitConverter.GetBytes((uint)padded.Length));
        }

        output.AddRange(Encoding.ASCII.GetBytes(padded));
        output.AddRange(payload);
        return [.. output];
    }

    private static byte[] Idx(byte type, int[] dims, byte[] payload)
    {
        var output = new List<byte> { 0, 0, type, (byte)dims.Length };
        foreach (int d in dims)
        {
            output.AddRange(BigEndianInts(d));
        }

        output.AddRange(payload);
        return [.. output];
    }

    private static byte[] BigEndianInts(params int[] values)
    {
        var bytes = new byte[values.Length * 4];
        for (int i = 0; i < values.Length; i++)
        {
            BinaryPrimitives.WriteInt32BigEndian(bytes.AsSpan(i * 4), values[i]);
        }

        return bytes;
    }

    private static byte[] BigEndianFloats(params float[] values)
    {
        var bytes = new byte[values.Length * 4];
        for (int i = 0; i < values.Length; i++)
        {
            BinaryPrimitives.WriteSingleBigEndian(bytes.AsSpan(i * 4), values[i]);
        }

        return bytes;
    }

    private static byte[] Gzip(byte[] data)
    {
        var output = new MemoryStream();
        using (var gzip = new GZipStream(output, CompressionLevel.SmallestSize, leaveOpen: true))
        {
            gzip.Write(data);
        }

        return output.ToArray();
    }
}

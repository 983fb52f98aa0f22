using System.Buffers.Binary;
using System.Text;
using FsCheck;
using FsCheck.Xunit;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.IO;
using VectorKit.Tests.Indexes;
using Xunit;

namespace VectorKit.Tests.IO;

/// <summary>
/// Search results written as neighbour files (.ivecs/.fvecs and .npy) and read back with 64-bit ids. The reference
/// for every round trip is the <see cref="BatchSearchResults"/> itself; the raw readers (<see cref="VecsFile.ReadIvecs(Stream, DataReadLimits?)"/>,
/// <see cref="NpyFile.ReadVectors(Stream, DataReadLimits?)"/>) check the padding as it lies in the file.
/// </summary>
public sealed class NeighborFileTests
{
    private const int Dimension = 2;

    // Five points on a line; ids chosen by the caller so tests can put them past int32.
    private static ExactIndex Line(params long[] ids)
    {
        var index = new ExactIndex(Dimension, DistanceMetric.SquaredEuclidean);
        for (int i = 0; i < ids.Length; i++)
        {
            index.Add(ids[i], [i, 0]);
        }

        return index;
    }

    // Three queries for k = 4; the filter lets query results hold only the ids it passes, so rows come out short.
    private static BatchSearchResults Search(ExactIndex index, Func<long, bool>? filter = null)
        => index.SearchBatch([0f, 0, 2.2f, 0, 9, 0], 4, new SearchOptions { Filter = filter });

    private static void AssertSameIds(BatchSearchResults expected, NeighborTable actual)
    {
        Assert.Equal(expected.QueryCount, actual.QueryCount);
        Assert.Equal(expected.K, actual.K);
        for (int q = 0; q < expected.QueryCount; q++)
        {
            Assert.Equal(expected[q].ToArray().Select(h => h.Id), actual[q].ToArray());
        }
    }

    [Fact]
    public void Ivecs_and_fvecs_round_trip_with_padding_for_short_rows()
    {
        using ExactIndex index = Line(7, 3, 11, 5, 2);
        BatchSearchResults results = Search(index, id => id is 3 or 5 or 11);
        Assert.Equal(3, results[0].Length); // fewer than K = 4: the row is padded
        var ids = new MemoryStream();
        var distances = new MemoryStream();

        VecsFile.WriteNeighbors(ids, distances, results);

        AssertSameIds(results, VecsFile.ReadNeighbors(new MemoryStream(ids.ToArray())));
        IntVectorSet raw = VecsFile.ReadIvecs(new MemoryStream(ids.ToArray()));
        Assert.Equal(4, raw.Dimension);
        Assert.Equal([3, 11, 5, -1], raw.Row(0).ToArray());
        VectorSet d = VecsFile.ReadFvecs(new MemoryStream(distances.ToArray()));
        for (int q = 0; q < results.QueryCount; q++)
        {
            float[] want = [.. results[q].ToArray().Select(h => h.Distance), .. Enumerable.Repeat(float.PositiveInfinity, 4 - results[q].Length)];
            Assert.Equal(want, d.Row(q).ToArray());
        }
    }

    [Fact]
    public void Npy_round_trips_64_bit_ids_and_distances()
    {
        long big = (long)int.MaxValue + 10;
        using ExactIndex index = Line(big, -big, long.MaxValue, long.MinValue, 0);
        BatchSearchResults results = Search(index, id => id != 0);
        var ids = new MemoryStream();
        var distances = new MemoryStream();

        NpyFile.WriteNeighbors(ids, distances, results);

        AssertSameIds(results, NpyFile.ReadNeighbors(new MemoryStream(ids.ToArray())));
        using var reader = new NpyReader(new MemoryStream(ids.ToArray()));
        Assert.Equal("<i8", reader.DataType);
        Assert.Equal([3L, 4L], reader.Shape);
        VectorSet d = NpyFile.ReadVectors(new MemoryStream(distances.ToArray()));
        Assert.Equal(4, d.Dimension);
        Assert.Equal(results[1].ToArray().Select(h => h.Distance), d.Row(1).ToArray());
    }

    [Fact]
    public void Files_written_by_path_round_trip_and_evaluate_without_casts()
    {
        string dir = Directory.CreateTempSubdirectory("vk-neighbors-").FullName;
        try
        {
            using ExactIndex index = Line(40, 41, 42, 43, 44);
            BatchSearchResults results = Search(index);
            VecsFile.WriteNeighbors(Path.Combine(dir, "gt.ivecs"), Path.Combine(dir, "gt.fvecs"), results);
            NpyFile.WriteNeighbors(Path.Combine(dir, "gt.npy"), distancesPath: null, results);

            NeighborTable fromIvecs = VecsFile.ReadNeighbors(Path.Combine(dir, "gt.ivecs"));
            NeighborTable fromNpy = NpyFile.ReadNeighbors(Path.Combine(dir, "gt.npy"));
            AssertSameIds(results, fromIvecs);
            AssertSameIds(results, fromNpy);
            Assert.Equal(results.QueryCount, VecsFile.ReadFvecs(Path.Combine(dir, "gt.fvecs")).Count);

            // Ground truth read from disk meets the index's long ids directly.
            Assert.Equal(1.0, Recall.AtK(fromIvecs, results, 4));
            Assert.Equal(1.0, Recall.AtK(fromNpy, results, 4));
        }
        finally
        {
            Directory.Delete(dir, recursive: true);
        }
    }

    [Fact]
    public void An_id_beyond_int32_is_named_with_query_and_rank_and_no_file_is_created()
    {
        long big = (long)int.MaxValue + 1;
        using ExactIndex index = Line(1, 2, big, 4, 5);
        BatchSearchResults results = Search(index);
        var stream = new MemoryStream();

        var e = Assert.Throws<ArgumentException>(() => VecsFile.WriteNeighbors(stream, null, results));

        Assert.Equal("results", e.ParamName);
        Assert.StartsWith(
            $"results query 0, rank 2 has id {big}, outside the int32 range [-2147483648, 2147483647] that .ivecs files hold;",
            e.Message,
            StringComparison.Ordinal);
        Assert.Equal(0, stream.Length);

        string path = Path.Combine(Path.GetTempPath(), $"vk-{Guid.NewGuid():N}.ivecs");
        Assert.Throws<ArgumentException>(() => VecsFile.WriteNeighbors(path, null, results));
        Assert.False(File.Exists(path));
    }

    [Fact]
    public void Id_minus_one_is_rejected_because_it_marks_empty_slots()
    {
        using ExactIndex index = Line(-1, 2, 3);
        BatchSearchResults results = Search(index);
        var e = Assert.Throws<ArgumentException>(() => NpyFile.WriteNeighbors(new MemoryStream(), null, results));
        Assert.Equal("results", e.ParamName);
        Assert.StartsWith("results query 0, rank 0 has id -1, which .npy neighbour files reserve for an empty slot", e.Message, StringComparison.Ordinal);
        Assert.Throws<ArgumentException>(() => VecsFile.WriteNeighbors(new MemoryStream(), null, results));
    }

    [Fact]
    public void Npy_header_matches_the_bytes_numpy_writes()
    {
        // Expected bytes written by hand from the .npy format specification, version 1.0 (not produced by running
        // numpy): magic \x93NUMPY, version 1.0, uint16 little-endian header length, then the dict numpy's writer emits
        // (keys sorted, Python reprs, trailing ", }") padded with spaces and ended by '\n' so the data starts at byte 128,
        // a multiple of 64. Newer numpy releases add up to 21 spare spaces for in-place growth before aligning; for this
        // shape that padding lands on the same 128 bytes.
        const string Dict = "{'descr': '<i8', 'fortran_order': False, 'shape': (3, 2), }";
        byte[] expected =
        [
            0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', 0x01, 0x00, 0x76, 0x00,
            .. Encoding.ASCII.GetBytes(Dict + new string(' ', 58) + "\n"),
        ];
        Assert.Equal(128, expected.Length);

        BatchSearchResults results = BatchSearchResultsTests.Make(2, 2, 1, 2);
        var ids = new MemoryStream();
        var distances = new MemoryStream();
        NpyFile.WriteNeighbors(ids, distances, results);

        byte[] idBytes = ids.ToArray();
        Assert.Equal(expected, idBytes[..128]);
        Assert.Equal(128 + (3 * 2 * 8), idBytes.Length);

        // The data: row-major little-endian int64, query 1 padded with -1 after its one hit (id 100).
        Assert.Equal([0L, 1, 100, -1, 200, 201], Enumerable.Range(0, 6).Select(i => BinaryPrimitives.ReadInt64LittleEndian(idBytes.AsSpan(128 + (8 * i)))));

        byte[] distanceBytes = distances.ToArray();
        byte[] expectedF4 = [.. expected];
        expectedF4[22] = (byte)'f'; // the dict starts at byte 10; "<i8" is at dict offsets 11..13
        expectedF4[23] = (byte)'4';
        Assert.Equal(expectedF4, distanceBytes[..128]);
        Assert.Equal(float.PositiveInfinity, BinaryPrimitives.ReadSingleLittleEndian(distanceBytes.AsSpan(128 + (3 * 4))));
    }

    [Property(MaxTest = 60)]
    public void Any_int64_matrix_round_trips_through_npy(PositiveInt dimensionSeed, long[] values)
    {
        int dimension = 1 + (dimensionSeed.Get % 9);
        long[] data = (values ?? [])[..((values?.Length ?? 0) / dimension * dimension)];
        var stream = new MemoryStream();
        NpyFile.Write(stream, data, dimension);

        NeighborTable back = NpyFile.ReadNeighbors(new MemoryStream(stream.ToArray()));

        // The reader drops each row's trailing -1 run; the reference applies the same rule to the written rows.
        Assert.Equal(data.Length / dimension, back.QueryCount);
        for (int q = 0; q < back.QueryCount; q++)
        {
            long[] row = data[(q * dimension)..((q + 1) * dimension)];
            int count = row.Length;
            while (count > 0 && row[count - 1] == -1)
            {
                count--;
            }

            Assert.Equal(row[..count], back[q].ToArray());
        }
    }

    [Property(MaxTest = 60)]
    public void Results_of_any_shape_round_trip_through_both_formats(PositiveInt kSeed, byte[] countSeeds)
    {
        int k = 1 + (kSeed.Get % 7);
        int[] counts = (countSeeds ?? []).Select(c => c % (k + 1)).ToArray();
        BatchSearchResults results = BatchSearchResultsTests.Make(k, counts);

        var npy = new MemoryStream();
        NpyFile.WriteNeighbors(npy, null, results);
        AssertSameIds(results, NpyFile.ReadNeighbors(new MemoryStream(npy.ToArray())));

        var ivecs = new MemoryStream();
        VecsFile.WriteNeighbors(ivecs, null, results);
        NeighborTable fromIvecs = VecsFile.ReadNeighbors(new MemoryStream(ivecs.ToArray()));
        if (counts.Length == 0)
        {
            // An empty .ivecs file carries no row length.
            Assert.Equal((0, 0), (fromIvecs.QueryCount, fromIvecs.K));
        }
        else
        {
            AssertSameIds(results, fromIvecs);
        }
    }

    [Fact]
    public void Neighbor_reader_widens_narrow_integer_dtypes_and_rejects_floats()
    {
        byte[] i4 = new byte[8];
        BinaryPrimitives.WriteInt32LittleEndian(i4, 9);
        BinaryPrimitives.WriteInt32LittleEndian(i4.AsSpan(4), -1);
        NeighborTable table = NpyFile.ReadNeighbors(new MemoryStream(NpyFileTests.Npy("<i4", "(1, 2)", i4)));
        Assert.Equal([9L], table[0].ToArray());

        byte[] u1 = [200, 7];
        Assert.Equal([200L, 7], NpyFile.ReadNeighbors(new MemoryStream(NpyFileTests.Npy("|u1", "(1, 2)", u1)))[0].ToArray());

        var e = Assert.Throws<InvalidOperationException>(() => NpyFile.ReadNeighbors(new MemoryStream(NpyFileTests.Npy("<f4", "(1, 1)", new byte[4]))));
        Assert.Contains("cannot be read as integers", e.Message);
    }

    [Fact]
    public void Unwritable_distance_stream_is_named()
    {
        BatchSearchResults results = BatchSearchResultsTests.Make(1, 1);
        var readOnly = new MemoryStream(new byte[4], writable: false);
        var e = Assert.Throws<ArgumentException>(() => VecsFile.WriteNeighbors(new MemoryStream(), readOnly, results));
        Assert.Equal("distances", e.ParamName);
        var n = Assert.Throws<ArgumentException>(() => NpyFile.WriteNeighbors(new MemoryStream(), readOnly, results));
        Assert.Equal("distances", n.ParamName);
        Assert.Throws<ArgumentNullException>(() => NpyFile.WriteNeighbors(new MemoryStream(), null, null!));
    }
}

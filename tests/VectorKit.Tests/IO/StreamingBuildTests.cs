using System.Buffers.Binary;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.IO;
using VectorKit.Tests.Evaluation;
using VectorKit.Tests.Indexes;
using VectorKit.Tests.TestData;
using Xunit;

namespace VectorKit.Tests.IO;

/// <summary>
/// <see cref="StreamingBuild"/> against the same index built in memory from the same rows (picked here by the documented
/// formula, not by the builder), against the naive oracle for recall, and against hostile files. Files are written here
/// byte by byte from the published layouts (an int32 dimension before each .fvecs/.bvecs row).
/// </summary>
public sealed class StreamingBuildTests : IDisposable
{
    private const int D = 16;
    private readonly string _directory = Directory.CreateTempSubdirectory("vk-streaming-").FullName;

    public void Dispose() => Directory.Delete(_directory, recursive: true);

    public static TheoryData<string> Kinds => new() { "inverted-file-product", "inverted-file-fast-scan", "inverted-file-8bit", "graph-8bit" };

    [Theory]
    [MemberData(nameof(Kinds))]
    public void StreamedBuild_GivesTheSameResultsAsAnInMemoryBuildOnTheSameTrainingRows(string kind)
    {
        const int n = 3000;
        const int sampleSize = 700;
        float[] data = ClusteredData.Generate(n, D, 20, 0.3f, seed: 51);
        string path = WriteFvecs("data.fvecs", data, D);

        using FileVectorSource source = StreamingBuild.OpenFullVectors(path);
        using VectorIndex streamed = Create(kind, source);
        StreamingBuildReport report = StreamingBuild.Build(streamed, path, new StreamingBuildOptions { BlockRows = 256, SampleSize = sampleSize });

        // The reference: rows ⌊i·n/s⌋ as training rows, every row added at once.
        float[] sample = new float[sampleSize * D];
        for (int i = 0; i < sampleSize; i++)
        {
            long row = (long)i * n / sampleSize;
            data.AsSpan((int)row * D, D).CopyTo(sample.AsSpan(i * D));
        }

        using VectorIndex memory = Create(kind, source);
        memory.Train(sample);
        memory.AddRange(Enumerable.Range(0, n).Select(i => (long)i).ToArray(), data);

        Assert.Equal(n, report.RowsAdded);
        Assert.Equal(sampleSize, report.TrainingRows);
        Assert.Equal(n, streamed.Count);
        float[] queries = ClusteredData.Generate(40, D, 20, 0.3f, seed: 52);
        var a = new SearchHit[10];
        var b = new SearchHit[10];
        for (int q = 0; q < 40; q++)
        {
            ReadOnlySpan<float> query = queries.AsSpan(q * D, D);
            int ca = streamed.Search(query, a);
            int cb = memory.Search(query, b);
            Assert.Equal(b.AsSpan(0, cb).ToArray(), a.AsSpan(0, ca).ToArray());
        }
    }

    [Fact]
    public void RandomTrainingRows_ReachTheRecallOfTrainingOnEveryRow_WithinTolerance()
    {
        const int n = 4000;
        float[] data = ClusteredData.Generate(n, D, 30, 0.35f, seed: 61);
        float[] queries = ClusteredData.Generate(60, D, 30, 0.35f, seed: 62);
        string path = WriteFvecs("data.fvecs", data, D);
        var naive = new NaiveIndex(D, DistanceMetric.SquaredEuclidean);
        for (int i = 0; i < n; i++)
        {
            naive.Add(i, data.AsSpan(i * D, D));
        }

        using FileVectorSource source = StreamingBuild.OpenFullVectors(path);
        using VectorIndex streamed = Create("inverted-file-product", source);
        StreamingBuild.Build(streamed, path, new StreamingBuildOptions { SampleSize = 500, TrainingRows = TrainingRowPick.Random, Seed = 7, BlockRows = 333 });
        using VectorIndex memory = Create("inverted-file-product", source);
        memory.Train(data);
        memory.AddRange(Enumerable.Range(0, n).Select(i => (long)i).ToArray(), data);

        double streamedRecall = RecallAgainst(naive, streamed, queries);
        double memoryRecall = RecallAgainst(naive, memory, queries);

        // 600 (query, neighbour) pairs: a sample of 500 rows instead of 4,000 may cost a few of them, not more.
        Assert.True(streamedRecall >= memoryRecall - 0.03, $"streamed recall {streamedRecall:F3}, in-memory {memoryRecall:F3}");
        Assert.True(memoryRecall >= 0.9, $"in-memory recall {memoryRecall:F3}");
    }

    [Fact]
    public void FastScanLayout_StreamedFromNpy_ReScoresFromTheMappedFile_ToTheNaiveNeighbours()
    {
        const int n = 5000;
        float[] data = ClusteredData.Generate(n, D, 25, 0.3f, seed: 71);
        float[] queries = ClusteredData.Generate(50, D, 25, 0.3f, seed: 72);
        string path = Path.Combine(_directory, "data.npy");
        WriteNpyFloat32(path, data, n, D);
        var naive = new NaiveIndex(D, DistanceMetric.SquaredEuclidean);
        for (int i = 0; i < n; i++)
        {
            naive.Add(i, data.AsSpan(i * D, D));
        }

        using FileVectorSource source = StreamingBuild.OpenFullVectors(path, reads: FileVectorReads.Mapped);
        using VectorIndex index = Create("inverted-file-fast-scan", source);
        StreamingBuildReport report = StreamingBuild.Build(index, path, new StreamingBuildOptions { BlockRows = 700, SampleSize = 1000 });
        Assert.Equal(n, report.RowsAdded);

        // Every list probed: only the four-bit codes' ranking before re-scoring can lose a neighbour, and 50 re-scored
        // candidates for 10 results leave room for their coarse distances.
        var all = new SearchOptions { SearchWidth = 16 };
        int found = 0;
        var hits = new SearchHit[10];
        for (int q = 0; q < 50; q++)
        {
            ReadOnlySpan<float> query = queries.AsSpan(q * D, D);
            var truth = naive.Ranked(query).Take(10).Select(h => h.Id).ToHashSet();
            int c = index.Search(query, hits, all);
            Assert.Equal(10, c);
            found += hits.Count(h => truth.Contains(h.Id));

            // Re-scored distances are the exact ones, read from the file by row number.
            foreach (SearchHit hit in hits)
            {
                double exact = 0;
                for (int j = 0; j < D; j++)
                {
                    double diff = query[j] - data[((int)hit.Id * D) + j];
                    exact += diff * diff;
                }

                Assert.Equal(exact, hit.Distance, 3);
            }
        }

        Assert.True(found >= 0.95 * 500, $"{found} of 500 true neighbours found");

        // A stored row finds itself at distance 0.
        var single = new SearchHit[1];
        Assert.Equal(1, index.Search(data.AsSpan(4321 * D, D), single, all));
        Assert.Equal(new SearchHit(4321, 0f), single[0]);
    }

    [Theory]
    [InlineData("inverted-file-fast-scan")]
    [InlineData("inverted-file-product")]
    public void StreamedInvertedFile_SizesItsListsFromTheSample_SoFewListsRegrow(string kind)
    {
        // 16 lists of about 1,250 rows added in blocks of 500: grown block by block, nearly every list regrows several
        // times; sized once from where the 1,000-row sample falls (plus two standard deviations), few lists outgrow it.
        const int n = 20_000;
        float[] data = ClusteredData.Generate(n, D, 16, 0.3f, seed: 91);
        string path = Path.Combine(_directory, "sized.npy");
        WriteNpyFloat32(path, data, n, D);
        using FileVectorSource source = StreamingBuild.OpenFullVectors(path);
        using var streamed = (InvertedFileIndex)Create(kind, source);
        StreamingBuild.Build(streamed, path, new StreamingBuildOptions { BlockRows = 500, SampleSize = 1000 });

        // The same rows in the same blocks through AddRange, on an index trained alike: the unsized reference.
        using var blockwise = (InvertedFileIndex)Create(kind, source);
        blockwise.Train(data.AsSpan(0, 1000 * D));
        for (int start = 0; start < n; start += 500)
        {
            blockwise.AddRange([.. Enumerable.Range(start, 500).Select(i => (long)i)], data.AsSpan(start * D, 500 * D));
        }

        Assert.Equal(n, streamed.Count);
        int lists = streamed.Options.ListCount;
        Assert.True(blockwise.ListRegrowths >= 2 * lists, $"the reference regrew its lists only {blockwise.ListRegrowths} times");
        Assert.True(streamed.ListRegrowths <= lists / 4, $"{streamed.ListRegrowths} list regrowths after sizing from the sample ({lists} lists)");

        // Sized or not, every row is found at distance 0.
        var hit = new SearchHit[1];
        foreach (int row in new[] { 0, 777, 12_345, n - 1 })
        {
            Assert.Equal(1, streamed.Search(data.AsSpan(row * D, D), hit, new SearchOptions { SearchWidth = lists }));
            Assert.Equal(row, hit[0].Id);
        }
    }

    [Fact]
    public void RandomTrainingRows_AreDistinctSeededAndInFileOrder()
    {
        // Rows whose first component is their row number: the trained 8-bit ranges then show which rows were read.
        const int n = 1000;
        float[] data = new float[n * D];
        for (int i = 0; i < n; i++)
        {
            data[i * D] = i;
        }

        string path = WriteFvecs("rows.fvecs", data, D);
        StreamingBuildReport first = BuildScalarGraph(path, new StreamingBuildOptions { SampleSize = 50, TrainingRows = TrainingRowPick.Random, Seed = 3 }, out float[] a);
        BuildScalarGraph(path, new StreamingBuildOptions { SampleSize = 50, TrainingRows = TrainingRowPick.Random, Seed = 3 }, out float[] b);
        BuildScalarGraph(path, new StreamingBuildOptions { SampleSize = 50, TrainingRows = TrainingRowPick.Random, Seed = 4 }, out float[] c);
        Assert.Equal(50, first.TrainingRows);
        Assert.Equal(a, b);
        Assert.NotEqual(a, c);
    }

    [Fact]
    public void BuffersHoldAtMostSampleAndBlockRows_AndEveryReadAtMostOneBlock()
    {
        const int n = 6000;
        float[] data = ClusteredData.Generate(n, D, 10, 0.3f, seed: 71);
        string path = WriteFvecs("data.fvecs", data, D);
        using FileVectorSource source = StreamingBuild.OpenFullVectors(path);
        using VectorIndex index = Create("inverted-file-product", source);
        StreamingBuildReport report = StreamingBuild.Build(index, path, new StreamingBuildOptions { BlockRows = 100, SampleSize = 300 });

        Assert.Equal(n, report.RowsAdded);
        Assert.Equal(100, report.LargestBlockRead);
        Assert.Equal(400, report.PeakRowsBuffered); // sample + block, far below the 6,000 rows of the file
        Assert.False(index.KeepsFullVectors);
    }

    [Fact]
    public void Progress_RunsThroughTheStagesInOrder_NeverDecreasing_AndEndsAtEveryRow()
    {
        const int n = 2500;
        float[] data = ClusteredData.Generate(n, D, 10, 0.3f, seed: 81);
        string path = WriteFvecs("data.fvecs", data, D);
        using FileVectorSource source = StreamingBuild.OpenFullVectors(path);
        using VectorIndex index = Create("graph-8bit", source);
        var progress = new SynchronousProgress<StreamingBuildProgress>();
        StreamingBuild.Build(index, path, new StreamingBuildOptions { BlockRows = 300, SampleSize = 400 }, progress);

        IReadOnlyList<StreamingBuildProgress> seen = progress.Values;
        Assert.Equal(StreamingBuildStage.ReadingSample, seen[0].Stage);
        for (int i = 1; i < seen.Count; i++)
        {
            Assert.True(seen[i].Stage >= seen[i - 1].Stage, $"stage went back at report {i}");
            if (seen[i].Stage == seen[i - 1].Stage)
            {
                Assert.True(seen[i].Completed >= seen[i - 1].Completed, $"progress went back at report {i}");
            }

            Assert.True(seen[i].Completed <= seen[i].Total);
        }

        Assert.Contains(seen, p => p is { Stage: StreamingBuildStage.Training, Completed: 1 });
        Assert.Equal(new StreamingBuildProgress(StreamingBuildStage.Adding, n, n), seen[^1]);
        long lastTrainingRow = 399L * n / 400;
        Assert.Equal(lastTrainingRow + 1, seen.Last(p => p.Stage == StreamingBuildStage.ReadingSample).Completed);
    }

    [Fact]
    public void Cancellation_DuringAdding_StopsBeforeTheNextBlock()
    {
        const int n = 3000;
        float[] data = ClusteredData.Generate(n, D, 10, 0.3f, seed: 91);
        string path = WriteFvecs("data.fvecs", data, D);
        using FileVectorSource source = StreamingBuild.OpenFullVectors(path);
        using VectorIndex index = Create("inverted-file-8bit", source);
        using var stop = new CancellationTokenSource();
        var progress = new CancelAt(stop, p => p is { Stage: StreamingBuildStage.Adding, Completed: >= 500 });

        Assert.ThrowsAny<OperationCanceledException>(() => StreamingBuild.Build(index, path, new StreamingBuildOptions { BlockRows = 500, SampleSize = 400 }, progress, stop.Token));
        Assert.Equal(500, index.Count);
    }

    [Fact]
    public void Cancellation_BeforeTraining_LeavesTheIndexUntrained()
    {
        float[] data = ClusteredData.Generate(2000, D, 10, 0.3f, seed: 92);
        string path = WriteFvecs("data.fvecs", data, D);
        using FileVectorSource source = StreamingBuild.OpenFullVectors(path);
        using VectorIndex index = Create("inverted-file-8bit", source);
        using var stop = new CancellationTokenSource();
        stop.Cancel();

        Assert.ThrowsAny<OperationCanceledException>(() => StreamingBuild.Build(index, path, null, null, stop.Token));
        Assert.False(index.IsTrained);
        Assert.Equal(0, index.Count);
    }

    [Fact]
    public void Bvecs_BuildsAndReScoresFromTheByteFile()
    {
        const int n = 1500;
        var random = new Random(5);
        byte[] bytes = new byte[n * D];
        random.NextBytes(bytes);
        string path = Path.Combine(_directory, "data.bvecs");
        using (var stream = File.Create(path))
        {
            Span<byte> prefix = stackalloc byte[4];
            BinaryPrimitives.WriteInt32LittleEndian(prefix, D);
            for (int r = 0; r < n; r++)
            {
                stream.Write(prefix);
                stream.Write(bytes, r * D, D);
            }
        }

        using FileVectorSource source = StreamingBuild.OpenFullVectors(path);
        var row = new float[D];
        Assert.True(source.TryGetVector(1234, row));
        Assert.Equal(bytes.AsSpan(1234 * D, D).ToArray().Select(b => (float)b), row);
        using (FileVectorSource mapped = StreamingBuild.OpenFullVectors(path, reads: FileVectorReads.Mapped))
        {
            var copy = new float[D];
            Assert.True(mapped.TryGetVector(1234, copy));
            Assert.Equal(row, copy);
        }

        using VectorIndex index = Create("graph-8bit", source);
        StreamingBuild.Build(index, path, new StreamingBuildOptions { BlockRows = 200, SampleSize = 300 });

        // A stored row is its own nearest neighbour at distance 0 once re-scored from the file.
        var hits = new SearchHit[1];
        Assert.Equal(1, index.Search(row, hits));
        Assert.Equal(new SearchHit(1234, 0f), hits[0]);
    }

    [Fact]
    public void Npy_OfFloat64_BuildsLikeTheFloat32Fvecs()
    {
        const int n = 1200;
        float[] data = ClusteredData.Generate(n, D, 10, 0.3f, seed: 93);
        string fvecs = WriteFvecs("data.fvecs", data, D);
        string npy = Path.Combine(_directory, "data.npy");
        WriteNpyFloat64(npy, data, n, D);
        using FileVectorSource source = StreamingBuild.OpenFullVectors(fvecs);
        using VectorIndex a = Create("inverted-file-8bit", source);
        using VectorIndex b = Create("inverted-file-8bit", source);
        StreamingBuild.Build(a, fvecs, new StreamingBuildOptions { SampleSize = 500 });
        StreamingBuild.Build(b, npy, new StreamingBuildOptions { SampleSize = 500 });

        var ha = new SearchHit[10];
        var hb = new SearchHit[10];
        for (int q = 0; q < 20; q++)
        {
            a.Search(data.AsSpan(q * 31 * D, D), ha);
            b.Search(data.AsSpan(q * 31 * D, D), hb);
            Assert.Equal(ha, hb);
        }
    }

    [Fact]
    public void TrainedIndex_IsNotRetrained_AndTheFileIsReadOnce()
    {
        const int n = 1500;
        float[] data = ClusteredData.Generate(n, D, 10, 0.3f, seed: 99);
        string path = WriteFvecs("data.fvecs", data, D);
        using FileVectorSource source = StreamingBuild.OpenFullVectors(path);
        using VectorIndex streamed = Create("inverted-file-8bit", source);
        using VectorIndex memory = Create("inverted-file-8bit", source);
        float[] other = ClusteredData.Generate(400, D, 10, 0.3f, seed: 100);
        streamed.Train(other);
        memory.Train(other);
        memory.AddRange(Enumerable.Range(0, n).Select(i => (long)i).ToArray(), data);
        var progress = new SynchronousProgress<StreamingBuildProgress>();

        StreamingBuildReport report = StreamingBuild.Build(streamed, path, new StreamingBuildOptions { BlockRows = 128 }, progress);

        Assert.Equal(0, report.TrainingRows);
        Assert.Equal(128, report.PeakRowsBuffered);
        Assert.All(progress.Values, p => Assert.Equal(StreamingBuildStage.Adding, p.Stage));
        var a = new SearchHit[10];
        var b = new SearchHit[10];
        for (int q = 0; q < 10; q++)
        {
            streamed.Search(data.AsSpan(q * 97 * D, D), a);
            memory.Search(data.AsSpan(q * 97 * D, D), b);
            Assert.Equal(b, a);
        }
    }

    [Fact]
    [Trait("CWE", "CWE-130")]
    public void TruncatedBvecs_IsRefusedAsAFullVectorSource()
    {
        string path = Path.Combine(_directory, "cut.bvecs");
        var bytes = new byte[(2 * (4 + D)) - 3];
        BinaryPrimitives.WriteInt32LittleEndian(bytes, D);
        BinaryPrimitives.WriteInt32LittleEndian(bytes.AsSpan(4 + D), D);
        File.WriteAllBytes(path, bytes);

        var e = Assert.Throws<DataFormatException>(() => StreamingBuild.OpenFullVectors(path));
        Assert.Contains("not a whole number of 20-byte rows of dimension 16", e.Message);
    }

    [Fact]
    [Trait("CWE", "CWE-130")]
    public void TruncatedFvecs_IsRejectedBeforeTraining_NamingTheFile()
    {
        float[] data = ClusteredData.Generate(1000, D, 10, 0.3f, seed: 94);
        string path = WriteFvecs("cut.fvecs", data, D);
        using (var stream = new FileStream(path, FileMode.Open))
        {
            stream.SetLength(stream.Length - 7);
        }

        using VectorIndex index = Create("inverted-file-8bit", null);
        var e = Assert.Throws<DataFormatException>(() => StreamingBuild.Build(index, path));
        Assert.Contains("not a whole number of rows of dimension 16", e.Message);
        Assert.Equal(Path.GetFullPath(path), e.FilePath);
        Assert.False(index.IsTrained);
    }

    [Fact]
    [Trait("CWE", "CWE-130")]
    public void TruncatedNpy_IsRejected()
    {
        float[] data = ClusteredData.Generate(500, D, 10, 0.3f, seed: 95);
        string path = Path.Combine(_directory, "cut.npy");
        WriteNpyFloat64(path, data, 500, D);
        using (var stream = new FileStream(path, FileMode.Open))
        {
            stream.SetLength(stream.Length - 8);
        }

        using VectorIndex index = Create("inverted-file-8bit", null);
        var e = Assert.Throws<DataFormatException>(() => StreamingBuild.Build(index, path));
        Assert.Contains("truncated", e.Message);
        Assert.Equal(0, index.Count);
    }

    [Fact]
    public void NonFiniteValue_IsReportedWithTheRowsOfItsBlock()
    {
        float[] data = ClusteredData.Generate(1000, D, 10, 0.3f, seed: 96);
        data[(777 * D) + 3] = float.NaN;
        string path = WriteFvecs("nan.fvecs", data, D);
        using VectorIndex index = Create("inverted-file-8bit", null);

        // Training rows ⌊i·1000/100⌋ skip row 777, so the value is found while adding.
        var e = Assert.Throws<DataFormatException>(() => StreamingBuild.Build(index, path, new StreamingBuildOptions { SampleSize = 100, BlockRows = 250 }));
        Assert.StartsWith($"fvecs file '{Path.GetFullPath(path)}': rows 750–999: ", e.Message);
        Assert.Equal(Path.GetFullPath(path), e.FilePath);
    }

    [Fact]
    public void WrongExtension_WrongDimension_EmptyFile_AndFilledIndex_AreRefused()
    {
        float[] data = ClusteredData.Generate(300, D, 10, 0.3f, seed: 97);
        string good = WriteFvecs("data.fvecs", data, D);
        string csv = Path.Combine(_directory, "data.csv");
        File.WriteAllText(csv, "1,2\n");
        string empty = Path.Combine(_directory, "empty.fvecs");
        File.WriteAllBytes(empty, []);

        using VectorIndex index = Create("inverted-file-8bit", null);
        Assert.Contains("'.csv'", Assert.Throws<ArgumentException>(() => StreamingBuild.Build(index, csv)).Message);
        using var wide = new InvertedFileIndex(D * 2, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 4, Encoding = VectorEncoding.Scalar8Bit });
        Assert.Contains("dimension 16; the index's dimension is 32", Assert.Throws<ArgumentException>(() => StreamingBuild.Build(wide, good)).Message);
        Assert.Contains("holds no vectors", Assert.Throws<DataFormatException>(() => StreamingBuild.Build(index, empty)).Message);

        StreamingBuild.Build(index, good, new StreamingBuildOptions { SampleSize = 100 });
        Assert.Contains("holds 300 vectors", Assert.Throws<InvalidOperationException>(() => StreamingBuild.Build(index, good)).Message);
    }

    [Fact]
    public void TooFewRowsForTheLists_NamesTheFileAndTheMinimum()
    {
        float[] data = ClusteredData.Generate(50, D, 10, 0.3f, seed: 98);
        string path = WriteFvecs("few.fvecs", data, D);
        using var index = new InvertedFileIndex(D, DistanceMetric.SquaredEuclidean, new InvertedFileOptions { ListCount = 64, Encoding = VectorEncoding.Scalar8Bit });
        var e = Assert.Throws<ArgumentException>(() => StreamingBuild.Build(index, path));
        Assert.Contains("Training on 50 rows", e.Message);
        Assert.Contains("at least 64 training rows", e.Message);
    }

    [Fact]
    public void Options_RejectOutOfRangeValues()
    {
        Assert.Throws<ArgumentOutOfRangeException>(() => new StreamingBuildOptions { BlockRows = 0 });
        Assert.Throws<ArgumentOutOfRangeException>(() => new StreamingBuildOptions { BlockRows = (1 << 20) + 1 });
        Assert.Throws<ArgumentOutOfRangeException>(() => new StreamingBuildOptions { SampleSize = 0 });
        Assert.Throws<ArgumentOutOfRangeException>(() => new StreamingBuildOptions { TrainingRows = (TrainingRowPick)7 });
    }

    private static VectorIndex Create(string kind, IFullVectorSource? source)
    {
        VectorIndex index = kind switch
        {
            "inverted-file-product" => new InvertedFileIndex(D, DistanceMetric.SquaredEuclidean, new InvertedFileOptions
            {
                ListCount = 16, SearchWidth = 4, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = 4, RescoreDepth = 50,
                FullVectors = FullVectorLocation.ExternalSource, MaxDegreeOfParallelism = 1,
            }),
            "inverted-file-fast-scan" => new InvertedFileIndex(D, DistanceMetric.SquaredEuclidean, new InvertedFileOptions
            {
                ListCount = 16, SearchWidth = 4, Encoding = VectorEncoding.ProductCodes, ProductCodeBytes = 4,
                ProductCodeLayout = ProductCodeLayout.FourBitFastScan, RescoreDepth = 50,
                FullVectors = FullVectorLocation.ExternalSource, MaxDegreeOfParallelism = 1,
            }),
            "inverted-file-8bit" => new InvertedFileIndex(D, DistanceMetric.SquaredEuclidean, new InvertedFileOptions
            {
                ListCount = 16, SearchWidth = 4, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 30,
                FullVectors = FullVectorLocation.ExternalSource, MaxDegreeOfParallelism = 1,
            }),
            _ => new GraphIndex(D, DistanceMetric.SquaredEuclidean, new GraphIndexOptions
            {
                Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 30, FullVectors = FullVectorLocation.ExternalSource,
                MaxDegreeOfParallelism = 1, LinksPerNode = 12, BuildWidth = 60,
            }),
        };
        if (source is not null)
        {
            index.AttachFullVectors(source);
        }

        return index;
    }

    private static double RecallAgainst(NaiveIndex naive, VectorIndex index, float[] queries)
    {
        int found = 0;
        int total = 0;
        var hits = new SearchHit[10];
        for (int q = 0; q < queries.Length / D; q++)
        {
            ReadOnlySpan<float> query = queries.AsSpan(q * D, D);
            var truth = naive.Ranked(query).Take(10).Select(h => h.Id).ToHashSet();
            int c = index.Search(query, hits);
            found += hits.Take(c).Count(h => truth.Contains(h.Id));
            total += 10;
        }

        return (double)found / total;
    }

    private StreamingBuildReport BuildScalarGraph(string path, StreamingBuildOptions options, out float[] firstColumnOfReconstruction)
    {
        using var index = new GraphIndex(D, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { Encoding = VectorEncoding.Scalar8Bit, MaxDegreeOfParallelism = 1 });
        StreamingBuildReport report = StreamingBuild.Build(index, path, options);

        // The 8-bit range of component 0 is learnt from the training rows only, so stored row values reveal it.
        firstColumnOfReconstruction = new float[5];
        var row = new float[D];
        for (int i = 0; i < 5; i++)
        {
            Assert.True(index.TryGetVector(i * 199, row));
            firstColumnOfReconstruction[i] = row[0];
        }

        return report;
    }

    private string WriteFvecs(string name, float[] data, int d)
    {
        string path = Path.Combine(_directory, name);
        var bytes = new byte[data.Length / d * (4 + (4 * d))];
        for (int r = 0, at = 0; r < data.Length / d; r++)
        {
            BinaryPrimitives.WriteInt32LittleEndian(bytes.AsSpan(at), d);
            at += 4;
            for (int j = 0; j < d; j++, at += 4)
            {
                BinaryPrimitives.WriteSingleLittleEndian(bytes.AsSpan(at), data[(r * d) + j]);
            }
        }

        File.WriteAllBytes(path, bytes);
        return path;
    }

    private static void WriteNpyFloat32(string path, float[] data, int rows, int d) => WriteNpy(path, data, rows, d, doubles: false);

    private static void WriteNpyFloat64(string path, float[] data, int rows, int d) => WriteNpy(path, data, rows, d, doubles: true);

    // Written here, not by the library, so the reader is checked against an independent writer.
    private static void WriteNpy(string path, float[] data, int rows, int d, bool doubles)
    {
        // NEP 1, version 1.0: magic, version, header length, a dict padded with spaces to a multiple of 64 ending in '\n'.
        string dict = $"{{'descr': '<f{(doubles ? 8 : 4)}', 'fortran_order': False, 'shape': ({rows}, {d}), }}";
        int total = 10 + dict.Length + 1;
        int padded = (total + 63) / 64 * 64;
        string header = dict + new string(' ', padded - total) + "\n";
        using var stream = File.Create(path);
        stream.Write([0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', 1, 0]);
        Span<byte> length = stackalloc byte[2];
        BinaryPrimitives.WriteUInt16LittleEndian(length, (ushort)header.Length);
        stream.Write(length);
        stream.Write(System.Text.Encoding.ASCII.GetBytes(header));
        Span<byte> value = stackalloc byte[doubles ? 8 : 4];
        foreach (float x in data)
        {
            if (doubles)
            {
                BinaryPrimitives.WriteDoubleLittleEndian(value, x);
            }
            else
            {
                BinaryPrimitives.WriteSingleLittleEndian(value, x);
            }

            stream.Write(value);
        }
    }

    private sealed class CancelAt(CancellationTokenSource stop, Func<StreamingBuildProgress, bool> when) : IProgress<StreamingBuildProgress>
    {
        public void Report(StreamingBuildProgress value)
        {
            if (when(value))
            {
                stop.Cancel();
            }
        }
    }
}

using System.Buffers.Binary;
using System.Diagnostics;
using System.Globalization;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using Xunit.Abstractions;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// A seeded mutation fuzzer for the loader: valid files of every kind are damaged (bit flips, random and boundary
/// values, cuts, insertions, header edits), most of them then re-checksummed so the damage reaches the structural
/// checks. Every input must either load, and then survive searches, adds and removals, or raise
/// <see cref="IndexFileException"/>; anything else, or a hang, fails the test with the input's seed.
/// </summary>
/// <remarks>
/// CI runs a bounded number of inputs. For a long run set <c>VECTORKIT_FUZZ_SECONDS</c> (and optionally
/// <c>VECTORKIT_FUZZ_SEED</c>), e.g. <c>VECTORKIT_FUZZ_SECONDS=600 dotnet test tests/VectorKit.Tests -c Release
/// --filter "FullyQualifiedName~IndexFileFuzz" --logger "console;verbosity=detailed"</c>; the report line gives the
/// number of inputs tried.
/// </remarks>
public class IndexFileFuzzTests(ITestOutputHelper output)
{
    private const int CiInputs = 3000;

    private static readonly long[] Interesting =
        [0, 1, -1, 2, 3, 30, 31, 64, 255, 256, 512, 513, 4096, 65_536, 1 << 20, int.MaxValue, int.MinValue, uint.MaxValue, long.MaxValue, long.MinValue, 1_000_000_000_000];

    [Fact]
    [Trait("Weakness", "fuzz (CWE-20, CWE-125, CWE-400, CWE-789)")]
    public void MutatedFiles_LoadAndWork_OrRaiseIndexFileException()
    {
        double seconds = double.TryParse(Environment.GetEnvironmentVariable("VECTORKIT_FUZZ_SECONDS"), NumberStyles.Float, CultureInfo.InvariantCulture, out double s) ? s : 0;
        int seed = int.TryParse(Environment.GetEnvironmentVariable("VECTORKIT_FUZZ_SEED"), out int parsed) ? parsed : 20261202;
        List<byte[]> corpus = Corpus();
        var clock = Stopwatch.StartNew();
        int tried = 0, loaded = 0, rejected = 0;
        var bySection = new SortedDictionary<string, int>(StringComparer.Ordinal);
        while (seconds > 0 ? clock.Elapsed.TotalSeconds < seconds : tried < CiInputs)
        {
            int inputSeed = unchecked(seed + (tried * 7919));
            var random = new Random(inputSeed);
            byte[] input = Mutate(corpus[random.Next(corpus.Count)], random);
            if (random.Next(4) != 0)
            {
                IndexFileBytes.FixChecksums(input);
            }

            IndexLoadOptions options = random.Next(2) == 0 ? IndexLoadOptions.Default : IndexLoadOptions.Untrusted;
            (Exception? error, IVectorIndex? index) = LoadGuarded(input, options, inputSeed);
            tried++;
            if (error is not null)
            {
                Assert.True(error is IndexFileException, $"input seed {inputSeed}: {error.GetType().Name} escaped the loader: {error}");
                string where = ((IndexFileException)error).Section ?? "(none)";
                bySection[where] = bySection.GetValueOrDefault(where) + 1;
                rejected++;
                continue;
            }

            loaded++;
            Exercise(index!, random, inputSeed);
        }

        output.WriteLine(
            $"Loader fuzz: {tried} inputs tried in {clock.Elapsed.TotalSeconds:F1} s (seed {seed}): {loaded} loaded and exercised, {rejected} rejected with IndexFileException "
            + $"(by place: {string.Join(", ", bySection.Select(p => $"{p.Key} {p.Value}"))}); no other exception, no hang.");
        Assert.True(loaded > 0 && rejected > 0, $"the mutations should produce both outcomes: {loaded} loaded, {rejected} rejected");
    }

    private static List<byte[]> Corpus()
    {
        var corpus = new List<byte[]>();
        foreach (string name in new[] { "exact", "exact-cosine", "graph", "graph-inner-product", "ivf-float32", "ivf-product", "ivf-scalar", "ivf-external", "exact-scalar", "exact-scalar-full", "exact-scalar-external", "graph-scalar", "graph-scalar-full", "graph-scalar-external" })
        {
            corpus.Add(IndexFileDamageTests.Sample(name));
        }

        using (var wide = PersistenceSamples.Graph(count: 120, dimension: 2, metric: DistanceMetric.Cosine, seed: 3))
        {
            corpus.Add(IndexFileBytes.Save(wide));
        }

        using (var empty = new VectorKit.Indexes.Graph.GraphIndex(3, DistanceMetric.SquaredEuclidean))
        {
            corpus.Add(IndexFileBytes.Save(empty));
        }

        using (var untrained = new InvertedFileIndex(3, DistanceMetric.InnerProduct, new InvertedFileOptions { ListCount = 3, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 2 }))
        {
            corpus.Add(IndexFileBytes.Save(untrained));
        }

        return corpus;
    }

    internal static byte[] Mutate(byte[] original, Random random)
    {
        byte[] file = (byte[])original.Clone();
        int rounds = 1 + random.Next(3);
        for (int r = 0; r < rounds && file.Length > 0; r++)
        {
            switch (random.Next(8))
            {
                case 0:
                    file[random.Next(file.Length)] ^= (byte)(1 << random.Next(8));
                    break;
                case 1:
                    file[random.Next(file.Length)] = (byte)random.Next(256);
                    break;
                case 2:
                {
                    long value = Interesting[random.Next(Interesting.Length)];
                    int width = random.Next(2) == 0 ? 4 : 8;
                    int at = random.Next(Math.Max(1, file.Length - width));
                    if (at + width <= file.Length)
                    {
                        if (width == 4)
                        {
                            BinaryPrimitives.WriteInt32LittleEndian(file.AsSpan(at), unchecked((int)value));
                        }
                        else
                        {
                            BinaryPrimitives.WriteInt64LittleEndian(file.AsSpan(at), value);
                        }
                    }

                    break;
                }

                case 3:
                    file = file[..random.Next(file.Length)];
                    break;
                case 4:
                {
                    var extra = new byte[random.Next(1, 200)];
                    random.NextBytes(extra);
                    int at = random.Next(file.Length + 1);
                    file = [.. file.AsSpan(0, at), .. extra, .. file.AsSpan(at)];
                    break;
                }

                case 5:
                {
                    int at = random.Next(file.Length);
                    int length = Math.Min(file.Length - at, random.Next(1, 64));
                    file = [.. file.AsSpan(0, at), .. file.AsSpan(at + length)];
                    break;
                }

                default:
                    file = EditHeader(file, random);
                    break;
            }
        }

        return file;
    }

    // Changes one header value and re-composes the file with valid checksums, so the semantic checks are reached.
    private static byte[] EditHeader(byte[] file, Random random)
    {
        IndexHeader header;
        List<byte[]> payloads;
        try
        {
            header = IndexFileBytes.CopyHeader(IndexFileBytes.Header(file));
            payloads = IndexFileBytes.Payloads(file);
        }
        catch (Exception e) when (e is IndexFileException or ArgumentException)
        {
            return file;
        }

        long value = random.Next(3) == 0 ? Interesting[random.Next(Interesting.Length)] : random.Next(-2, 3);
        switch (random.Next(6))
        {
            case 0:
                header.Rows += value;
                break;
            case 1:
                header.Count += value;
                break;
            case 2:
                header.Dimension = unchecked((int)(header.Dimension + value));
                break;
            case 3 when header.Integers.Count > 0:
            {
                string key = header.Integers.Keys.ElementAt(random.Next(header.Integers.Count));
                header.Integers[key] = unchecked(header.Integers[key] + value);
                break;
            }

            case 4 when header.Sections.Count > 0:
            {
                int i = random.Next(header.Sections.Count);
                header.Sections[i] = header.Sections[i] with { Length = Math.Max(0, header.Sections[i].Length + value) };
                break;
            }

            default:
                header.Metric = (DistanceMetric)random.Next(-1, 4);
                break;
        }

        return IndexFileBytes.Compose(header, payloads.Take(header.Sections.Count).ToList());
    }

    private static (Exception? Error, IVectorIndex? Index) LoadGuarded(byte[] input, IndexLoadOptions options, int inputSeed)
    {
        var task = Task.Run(() =>
        {
            try
            {
                return ((Exception?)null, (IVectorIndex?)IndexFile.Load(new MemoryStream(input, writable: false), options));
            }
            catch (Exception e)
            {
                return (e, null);
            }
        });
        Assert.True(task.Wait(TimeSpan.FromSeconds(60)), $"input seed {inputSeed}: the loader did not finish within 60 s");
        return task.Result;
    }

    // A loaded index must work: searches, a batch, an add and a removal, all without any exception.
    private static void Exercise(IVectorIndex index, Random random, int inputSeed)
    {
        var task = Task.Run(() =>
        {
            using (index)
            {
                // An untrained inverted file loads as such; it must refuse searches and adds as a fresh one does.
                if (index is InvertedFileIndex { IsTrained: false })
                {
                    float[] unit = new float[index.Dimension];
                    unit[0] = 1;
                    Assert.Throws<IndexNotTrainedException>(() => index.Search(unit, 1));
                    return;
                }

                int d = index.Dimension;
                float[] query = Enumerable.Range(0, d).Select(_ => (float)(random.NextDouble() - 0.5)).ToArray();
                query[0] += 1;

                // A loaded index that re-scores from an external source has none until one is attached.
                if (index is IExternalFullVectors { ReadsFullVectorsExternally: true, FullVectorSource: null } external)
                {
                    Assert.Throws<InvalidOperationException>(() => index.Search(query, 5));
                    external.AttachFullVectors(new AnyIdSource(d));
                }

                index.Search(query, 5);
                index.Search(query, 3, new SearchOptions { Filter = id => id % 2 == 0, SearchWidth = 4 });
                index.SearchBatch([.. query, .. query], 4);
                long fresh = long.MinValue + random.Next(1000);
                if (!index.Contains(fresh))
                {
                    index.Add(fresh, query);
                    index.Search(query, 5);
                    index.Remove(fresh);
                }
            }
        });
        bool finished = task.Wait(TimeSpan.FromSeconds(60));
        Assert.True(finished, $"input seed {inputSeed}: using the loaded index did not finish within 60 s");
        Assert.True(task.Exception is null, $"input seed {inputSeed}: the loaded index failed in use: {task.Exception}");
    }

    /// <summary>A vector for every id (never zero, so usable under cosine).</summary>
    private sealed class AnyIdSource(int dimension) : VectorKit.Indexes.IFullVectorSource
    {
        public int Dimension => dimension;

        public bool TryGetVector(long id, Span<float> destination)
        {
            for (int j = 0; j < dimension; j++)
            {
                destination[j] = 1 + ((id + j) & 7);
            }

            return true;
        }
    }
}

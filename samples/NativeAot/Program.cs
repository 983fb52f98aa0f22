// NativeAot: the library's main paths in an app published with native AOT (`dotnet publish -c Release`): exact,
// graph and inverted-file indexes, 8-bit and product codes, single and batch search, save and load through IndexFile,
// re-ranking settings as JSON and a re-ranking pipeline. Every line except those starting with "timing:" or "runtime:"
// depends only on the seed and the SIMD width, so scripts/check-aot.sh compares the native binary's output with a JIT run's.
using System.Diagnostics;
using System.Globalization;
using System.Runtime;
using System.Runtime.Intrinsics;
using NativeAotSample;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Persistence;
using VectorKit.Reranking;

CultureInfo.CurrentCulture = CultureInfo.InvariantCulture;
const int ItemCount = 8_000;
const int Dimension = 48;
const int QueryCount = 300;
const int K = 10;
const int Seed = 17;

var total = Stopwatch.StartNew();
var clock = Stopwatch.StartNew();
var catalogue = GearCatalogue.Generate(ItemCount, Dimension, Seed);
long[] ids = catalogue.Items.Select(item => item.Id).ToArray();
float[] queries = catalogue.SampleQueries(QueryCount, Seed + 1);
string width = Vector512.IsHardwareAccelerated ? "Vector512" : Vector256.IsHardwareAccelerated ? "Vector256" : Vector128.IsHardwareAccelerated ? "Vector128" : "Scalar";
Console.WriteLine($"Larchpass Outdoor Co-op native AOT sample (invented data, seed {Seed}): {ItemCount:#,0} items, {Dimension}-d, {QueryCount} queries, k = {K}");
// Under native AOT nothing is compiled at run time. (RuntimeFeature.IsDynamicCodeSupported cannot tell: PublishAot
// turns it off in JIT runs too, so they behave like the native binary.)
Console.WriteLine($"runtime: {(JitInfo.GetCompiledMethodCount() > 0 ? "JIT" : "native AOT")}");
Console.WriteLine($"widest SIMD: {width}");

// Exact float32: the reference every other index is measured against.
using var exact = new ExactIndex(Dimension, DistanceMetric.Cosine, new ExactIndexOptions { InitialCapacity = ItemCount });
exact.AddRange(ids, catalogue.Vectors);
BatchSearchResults truth = exact.SearchBatch(queries, K);
NeighborTable reference = NeighborTable.FromResults(truth);
Report("exact float32", exact, truth);
Console.WriteLine($"  first query: {string.Join(", ", Ids(exact.Search(queries.AsSpan(0, Dimension), 5)))}");

// Exact over 8-bit codes with exact re-scoring of the best 40.
using var exact8 = new ExactIndex(Dimension, DistanceMetric.Cosine, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 40 });
exact8.Train(catalogue.Vectors);
exact8.AddRange(ids, catalogue.Vectors);
Report("exact 8-bit", exact8, exact8.SearchBatch(queries, K));

// Graph (HNSW), built on one thread so the links, and so the answers, are the same on every run.
clock.Restart();
using var graph = new GraphIndex(Dimension, DistanceMetric.Cosine, new GraphIndexOptions { Seed = Seed, MaxDegreeOfParallelism = 1 });
graph.AddRange(ids, catalogue.Vectors);
Timing("graph build", clock);
BatchSearchResults graphResults = graph.SearchBatch(queries, K);
Report("graph float32", graph, graphResults);

// Graph over 8-bit codes.
using var graph8 = new GraphIndex(Dimension, DistanceMetric.Cosine, new GraphIndexOptions { Seed = Seed, MaxDegreeOfParallelism = 1, Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 40 });
graph8.Train(catalogue.Vectors);
graph8.AddRange(ids, catalogue.Vectors);
Report("graph 8-bit", graph8, graph8.SearchBatch(queries, K));

// Inverted file with product codes (k-means and codebooks trained on one thread), re-scored from full vectors.
clock.Restart();
using var inverted = new InvertedFileIndex(Dimension, DistanceMetric.Cosine, new InvertedFileOptions
{
    ListCount = 32,
    SearchWidth = 8,
    Encoding = VectorEncoding.ProductCodes,
    ProductCodeBytes = 12,
    RescoreDepth = 40,
    Seed = Seed,
    MaxDegreeOfParallelism = 1,
});
inverted.Train(catalogue.Vectors);
inverted.AddRange(ids, catalogue.Vectors);
Timing("inverted-file training and build", clock);
BatchSearchResults invertedResults = inverted.SearchBatch(queries, K);
Report("inverted file, product codes", inverted, invertedResults);

// Filtered single search: only items on the shelf.
SearchHit[] onShelf = graph.Search(queries.AsSpan(0, Dimension), 5, new SearchOptions { Filter = id => catalogue.Items[(int)id].InStock });
Console.WriteLine($"graph, first query, in stock only: {string.Join(", ", Ids(onShelf))}; all in stock: {(onShelf.All(hit => catalogue.Items[(int)hit.Id].InStock) ? "yes" : "NO")}");

// Save and load each kind; the loaded index must answer exactly as the saved one.
string directory = Directory.CreateTempSubdirectory("vectorkit-aot-").FullName;
try
{
    clock.Restart();
    using ExactIndex exactLoaded = RoundTrip(exact, "exact");
    using GraphIndex graphLoaded = RoundTrip(graph, "graph");
    using InvertedFileIndex invertedLoaded = RoundTrip(inverted, "inverted");
    string untypedPath = Path.Combine(directory, "graph8.vkx");
    IndexFile.Save(graph8, untypedPath);
    using IVectorIndex graph8Loaded = IndexFile.Load(untypedPath, IndexLoadOptions.Untrusted);
    Timing("save and load of four indexes", clock);
    Console.WriteLine($"loaded exact: same answers: {Same(truth, exactLoaded.SearchBatch(queries, K))}");
    Console.WriteLine($"loaded graph: same answers: {Same(graphResults, graphLoaded.SearchBatch(queries, K))}");
    Console.WriteLine($"loaded inverted file: same answers: {Same(invertedResults, invertedLoaded.SearchBatch(queries, K))}");
    Console.WriteLine($"loaded graph 8-bit (untyped, untrusted limits): {graph8Loaded.GetType().Name}, same answers: {Same(graph8.SearchBatch(queries, K), graph8Loaded.SearchBatch(queries, K))}");
}
finally
{
    Directory.Delete(directory, recursive: true);
}

// Re-ranking: settings through JSON (source-generated serialisation), then a pipeline over the graph.
var settings = new RerankingOptions { RetrievalDepth = 60, FinalCount = 5, SearchWidth = 96, ScoringBatchSize = 32 };
string json = settings.ToJson();
RerankingOptions restored = RerankingOptions.FromJson(json);
Console.WriteLine($"re-ranking settings as JSON, read back equal: {(restored.ToJson() == json ? "yes" : "NO")}");
foreach (string line in json.Split('\n'))
{
    Console.WriteLine($"  {line.TrimEnd('\r')}");
}

var pipeline = new RerankingPipeline<GearRequest>(graph, new ShelfAwareScorer(catalogue), restored);
var requests = new GearRequest[20];
for (int r = 0; r < requests.Length; r++)
{
    requests[r] = new GearRequest(queries.AsSpan(r * Dimension, Dimension).ToArray(), OnShelfOnly: r % 2 == 0);
}

RerankedHit[] reranked = await pipeline.RerankAsync(requests[0]);
Console.WriteLine($"re-ranked, first request (on the shelf only): {string.Join(", ", reranked.Select(hit => $"#{hit.Id} {catalogue.Items[(int)hit.Id].Name} (retrieval rank {hit.RetrievalRank + 1})"))}");
RerankingResults batch = pipeline.RerankBatch(requests);
ulong rerankDigest = Fnv.Start;
for (int r = 0; r < batch.QueryCount; r++)
{
    foreach (RerankedHit hit in batch[r])
    {
        rerankDigest = Fnv.Add(Fnv.Add(rerankDigest, hit.Id), BitConverter.SingleToInt32Bits(hit.Score));
    }
}

bool sameFirst = batch[0].SequenceEqual(reranked);
Console.WriteLine($"re-ranked batch of {batch.QueryCount}: {batch.PairsScored:#,0} pairs scored, digest {rerankDigest:x16}; first equals the single call: {(sameFirst ? "yes" : "NO")}");
Timing("whole run", total);

T RoundTrip<T>(T index, string name)
    where T : class, IVectorIndex
{
    string path = Path.Combine(directory, name + ".vkx");
    IndexFile.Save(index, path);
    return IndexFile.Load<T>(path);
}

void Report(string name, IVectorIndex index, BatchSearchResults results)
{
    ulong digest = Fnv.Start;
    for (int q = 0; q < results.QueryCount; q++)
    {
        foreach (SearchHit hit in results[q])
        {
            digest = Fnv.Add(Fnv.Add(digest, hit.Id), BitConverter.SingleToInt32Bits(hit.Distance));
        }
    }

    double recall = Recall.AtK(reference, results, K);
    Console.WriteLine($"{name}: {index.Count:#,0} items, {index.CodeBytesPerVector} code bytes each, recall@{K} {recall:0.0000}, digest {digest:x16}");
}

static string Same(BatchSearchResults a, BatchSearchResults b)
{
    if (a.QueryCount != b.QueryCount)
    {
        return "NO";
    }

    for (int q = 0; q < a.QueryCount; q++)
    {
        if (!a[q].SequenceEqual(b[q]))
        {
            return "NO";
        }
    }

    return "yes";
}

static IEnumerable<string> Ids(SearchHit[] hits) => hits.Select(hit => $"#{hit.Id}");

static void Timing(string what, Stopwatch clock) => Console.WriteLine($"timing: {what} {clock.Elapsed.TotalMilliseconds:0} ms");

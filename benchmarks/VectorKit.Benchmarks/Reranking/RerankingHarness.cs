using System.Diagnostics;
using System.Globalization;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;
using VectorKit.Reranking;
using VectorKit.Tuning;

namespace VectorKit.Benchmarks.Reranking;

/// <summary>
/// The re-ranking benchmark (<c>-- reranking [items] [hidden width]</c>): a collection of 100,000 items with 64-d
/// clustered embeddings and attributes, a pairwise scorer costing about 20 µs per pair, and — side by side in one
/// run, on the same queries and threads — scoring everything against a calibrated pipeline over a graph index:
/// scorer calls per query, queries/s, and the pipeline's recall of the exhaustive top 10. With <c>tuned-codes</c> the
/// index is an inverted file of product codes tuned to a recall target first, and the calibration adds an exact
/// re-scoring stage over the full vectors, choosing the depths jointly and reporting where the recall went.
/// </summary>
public static class RerankingHarness
{
    private const int Dimension = 64;
    private const int K = 10;
    private const int Kinds = 200;

    public static void Run(int itemCount, int hiddenWidth, int baselineQueries, bool tunedCodes = false)
    {
        CultureInfo.CurrentCulture = CultureInfo.InvariantCulture;
        int threads = Environment.ProcessorCount;
        Console.WriteLine($"Re-ranking benchmark: {itemCount:N0} items × {Dimension}, top {K}, {threads} threads, .NET {Environment.Version}");

        var random = new Random(42);
        float[] centres = Gaussian(random, Kinds * Dimension, 1f);
        float[] items = new float[itemCount * Dimension];
        int[] depots = new int[itemCount];
        bool[] booked = new bool[itemCount];
        for (int i = 0; i < itemCount; i++)
        {
            Member(random, centres, items.AsSpan(i * Dimension, Dimension));
            depots[i] = random.Next(12);
            booked[i] = random.NextDouble() < 0.3;
        }

        GearQuery[] Queries(int count, int seed)
        {
            var r = new Random(seed);
            return Enumerable.Range(0, count).Select(_ =>
            {
                float[] taste = new float[Dimension];
                Member(r, centres, taste);
                return new GearQuery(taste, r.Next(12));
            }).ToArray();
        }

        var scorer = new MlpScorer(items, depots, booked, Dimension, hiddenWidth, seed: 5);
        double microsecondsPerPair = TimeScorer(scorer, Queries(4, 1)[0], itemCount);
        Console.WriteLine($"Scorer: MLP {2 * Dimension} → {hiddenWidth} → {Math.Max(1, hiddenWidth / 3)} → 1 plus business terms: {microsecondsPerPair:0.0} µs per pair (one thread, best of 5 passes over 1,024 consecutive ids).");

        var clock = Stopwatch.StartNew();
        long[] ids = Enumerable.Range(0, itemCount).Select(i => (long)i).ToArray();
        using VectorIndex index = tunedCodes ? BuildTunedCodes(ids, items) : new GraphIndex(Dimension, DistanceMetric.Cosine);
        if (!tunedCodes)
        {
            index.AddRange(ids, items);
            Console.WriteLine($"Graph index (defaults) built in {clock.Elapsed.TotalSeconds:0.0} s.");
        }

        // Calibration: the smallest depth keeping 0.95 of the exhaustive top 10 (lower confidence bound on tuning queries).
        var options = new CalibrationOptions
        {
            TargetRecall = 0.95,
            FinalCount = K,
            MaxUncertainty = 0.05,
            Seed = 1,
            ExactRescoringOverfetch = tunedCodes ? 4 : null,
            FullVectors = tunedCodes ? new RowVectors(items, Dimension) : null,
        };
        GearQuery[] sample = Queries(RerankingCalibration.RequiredSampleSize(options), seed: 2);
        clock.Restart();
        CalibrationReport report = RerankingCalibration.Calibrate(index, scorer, sample, options);
        Console.WriteLine($"Calibration on {sample.Length} sample queries took {clock.Elapsed.TotalSeconds:0} s:");
        Console.WriteLine(report.ToTable());

        // Side by side on the same fresh queries, all threads each.
        GearQuery[] evaluation = Queries(baselineQueries, seed: 3);
        clock.Restart();
        long[][] truth = RerankingCalibration.ScoreEverything(scorer, evaluation, ids, K);
        double exhaustiveSeconds = clock.Elapsed.TotalSeconds;

        var pipeline = new RerankingPipeline<GearQuery>(index, scorer, report.Settings, options.FullVectors);
        pipeline.RerankBatch(evaluation);   // warm-up
        GearQuery[] many = Queries(Math.Max(200, baselineQueries), seed: 4);
        clock.Restart();
        RerankingResults manyResults = pipeline.RerankBatch(many);
        double pipelineSeconds = clock.Elapsed.TotalSeconds;
        RerankingResults results = pipeline.RerankBatch(evaluation);
        long[][] found = Enumerable.Range(0, evaluation.Length).Select(q => results[q].ToArray().Select(h => h.Id).ToArray()).ToArray();
        double recall = Recall.AtK(truth, found, K);

        double exhaustiveQps = evaluation.Length / exhaustiveSeconds;
        double pipelineQps = many.Length / pipelineSeconds;
        double pipelineCalls = manyResults.PairsScored / (double)many.Length;
        Console.WriteLine();
        Console.WriteLine("| | scorer calls/query | queries/s | recall of exhaustive top 10 | queries timed |");
        Console.WriteLine("|---|---:|---:|---:|---:|");
        Console.WriteLine($"| score everything | {itemCount:N0} | {exhaustiveQps:0.###} | 1 (by definition) | {evaluation.Length} |");
        Console.WriteLine($"| calibrated pipeline (depth {report.Settings.RetrievalDepth}) | {pipelineCalls:N0} | {pipelineQps:0.#} | {recall:0.000} on those {evaluation.Length}; held-out {report.HeldOutRecall:0.000} [{report.HeldOutRecallLow:0.000}, {report.HeldOutRecallHigh:0.000}] | {many.Length} |");
        Console.WriteLine($"| ratio | {itemCount / pipelineCalls:0.#}x fewer | {pipelineQps / exhaustiveQps:0.#}x | | |");
    }

    // An inverted file of 32-byte product codes without full vectors, tuned to recall@10 0.9 of its own metric on
    // queries drawn from its vectors; the pipeline's exact stage reads the full vectors from the caller's rows.
    private static VectorIndex BuildTunedCodes(long[] ids, float[] items)
    {
        var clock = Stopwatch.StartNew();
        var index = new InvertedFileIndex(Dimension, DistanceMetric.Cosine, new InvertedFileOptions
        {
            Encoding = VectorEncoding.ProductCodes,
            ProductCodeBytes = 32,
            RescoreDepth = 0,
            ListCount = 256,
        });
        index.Train(items);
        index.AddRange(ids, items);
        Console.WriteLine($"Inverted file (256 lists, 32-byte product codes, no full vectors) built in {clock.Elapsed.TotalSeconds:0.0} s.");
        clock.Restart();
        TuningReport tuning = RecallTuning.Tune(index, new RecallTuningOptions { TargetRecall = 0.9, K = K });
        Console.WriteLine($"Tuned to recall@{K} 0.9 in {clock.Elapsed.TotalSeconds:0} s: {index.TunedDefaults}; held-out recall {tuning.HeldOut.Recall:0.000} [{tuning.HeldOut.RecallLow:0.000}, {tuning.HeldOut.RecallHigh:0.000}].");
        return index;
    }

    private sealed class RowVectors(float[] rows, int dimension) : IFullVectorSource
    {
        public int Dimension => dimension;

        public bool TryGetVector(long id, Span<float> destination)
        {
            if ((ulong)id >= (ulong)(rows.Length / dimension))
            {
                return false;
            }

            rows.AsSpan((int)id * dimension, dimension).CopyTo(destination);
            return true;
        }
    }

    private static double TimeScorer(MlpScorer scorer, GearQuery query, int itemCount)
    {
        // As the exhaustive pass calls it: blocks of 1,024 consecutive ids. Warm-up calls until the JIT's optimised
        // tier is in place, then the best of five timed passes.
        long[] ids = Enumerable.Range(0, Math.Min(1024, itemCount)).Select(i => (long)i).ToArray();
        float[] scores = new float[ids.Length];
        for (int r = 0; r < 60; r++)
        {
            scorer.Score(query, ids.AsSpan(0, 50), scores.AsSpan(0, 50));
        }

        Thread.Sleep(500);
        double best = double.MaxValue;
        for (int r = 0; r < 5; r++)
        {
            var clock = Stopwatch.StartNew();
            scorer.Score(query, ids, scores);
            best = Math.Min(best, clock.Elapsed.TotalMilliseconds * 1000 / ids.Length);
        }

        return best;
    }

    private static void Member(Random random, float[] centres, Span<float> row)
    {
        int kind = random.Next(Kinds);
        for (int j = 0; j < row.Length; j++)
        {
            row[j] = centres[(kind * Dimension) + j] + (0.8f * Normal(random));
        }

        float norm = MathF.Sqrt(System.Numerics.Tensors.TensorPrimitives.SumOfSquares(row));
        System.Numerics.Tensors.TensorPrimitives.Divide(row, norm, row);
    }

    private static float[] Gaussian(Random random, int count, float scale)
        => Enumerable.Range(0, count).Select(_ => scale * Normal(random)).ToArray();

    private static float Normal(Random random)
        => (float)(Math.Sqrt(-2 * Math.Log(1 - random.NextDouble())) * Math.Cos(2 * Math.PI * random.NextDouble()));
}

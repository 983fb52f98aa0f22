// Re-ranking: the Larchpass Outdoor Co-op (invented) ranks rental gear for a member with its own pairwise scorer,
// which weighs depot distance, availability and fee as well as taste. Retrieval by taste embedding alone prunes
// away items the scorer would have ranked first; calibration measures that loss and picks the depth that keeps
// 95 % of the scorer's top 10. Everything is generated from seeds; the run takes well under a minute on two cores.
using System.Diagnostics;
using System.Globalization;
using RerankingSample;
using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes.Graph;
using VectorKit.Reranking;

CultureInfo.CurrentCulture = CultureInfo.InvariantCulture;
const int ItemCount = 30_000;
const int Dimension = 32;
const int K = 10;
const int EvaluationQueries = 200;

var catalogue = RentalCatalogue.Generate(ItemCount, Dimension, seed: 7);
long[] ids = catalogue.Items.Select(item => item.Id).ToArray();
var clock = Stopwatch.StartNew();
using var index = new GraphIndex(Dimension, DistanceMetric.Cosine);
index.AddRange(ids, catalogue.Vectors);
Console.WriteLine($"Larchpass Outdoor Co-op re-ranking demo (invented data): {ItemCount:N0} items, {Dimension}-d taste embeddings, graph index built in {clock.Elapsed.TotalSeconds:0.0} s.");
var scorer = new RentalMatchScorer(catalogue, seed: 11);

// The scorer's true top 10 for fresh requests: score every item (the cost the pipeline exists to avoid). Its time
// per request is measured once, by calibration, and printed in the table below beside the other stages' times.
RentalRequest[] evaluation = catalogue.Requests(EvaluationQueries, seed: 2);
long[][] truth = RerankingCalibration.ScoreEverything(scorer, evaluation, ids, K);
Console.WriteLine($"Scoring everything: {ItemCount:N0} scorer calls per request, done for {EvaluationQueries} evaluation requests (time per request: see the calibration table).");

// 1. One request, answered exhaustively and with naive pruning (the scorer sees only the 10 nearest by taste).
RentalRequest request = evaluation[0];
var naive = new RerankingPipeline<RentalRequest>(index, scorer, new RerankingOptions { FinalCount = K, RetrievalDepth = K });
var wide = new RerankingPipeline<RentalRequest>(index, scorer, new RerankingOptions { FinalCount = K, RetrievalDepth = 4096 });
Console.WriteLine();
Console.WriteLine($"Request #{request.Number}: a member at depot {request.HomeDepot}, budget {request.FeeBudget} credits/day.");
Console.WriteLine("  Scorer's own top 5 (retrieval rank = position by taste similarity alone, 1 = nearest):");
foreach (RerankedHit hit in wide.Rerank(request).Take(5))
{
    Print(hit);
}

Console.WriteLine("  Naive pruning, the scorer sees only the 10 nearest by taste:");
foreach (RerankedHit hit in naive.Rerank(request).Take(5))
{
    Print(hit);
}

// 2. What fixed depths cost in recall, measured on the evaluation requests.
Console.WriteLine();
Console.WriteLine($"Recall of the scorer's top {K} over {EvaluationQueries} requests, fixed depths:");
foreach (int depth in new[] { 10, 50, 200 })
{
    (double recall, double calls) = Measure(new RerankingOptions { FinalCount = K, RetrievalDepth = depth });
    Console.WriteLine($"  depth {depth,5}: recall {recall:0.000}, {calls:0} scorer calls per request");
}

// 3. Calibration on a separate sample of requests.
var options = new CalibrationOptions { TargetRecall = 0.95, FinalCount = K, Confidence = 0.95, MaxUncertainty = 0.05, Seed = 1 };
int sampleSize = RerankingCalibration.RequiredSampleSize(options);
RentalRequest[] sample = catalogue.Requests(sampleSize, seed: 3);
Console.WriteLine();
Console.WriteLine($"Calibrating on {sampleSize} sample requests (the fewest that give ±{options.MaxUncertainty} at {options.Confidence:P0} confidence)...");
// Progress can arrive from worker threads: each stage is announced once, under a lock.
var announced = new HashSet<CalibrationStage>();
var progress = new InlineProgress(p =>
{
    lock (announced)
    {
        if (announced.Add(p.Stage))
        {
            Console.WriteLine($"  {StageName(p.Stage)}...");
        }
    }
});
CalibrationReport report = RerankingCalibration.Calibrate(index, scorer, sample, options, progress);
Console.WriteLine();
Console.WriteLine(report.ToTable());

// 4. The calibrated settings on the evaluation requests, which calibration never saw.
(double calibratedRecall, double calibratedCalls) = Measure(report.Settings);
Console.WriteLine();
Console.WriteLine($"Calibrated settings on the {EvaluationQueries} evaluation requests: recall {calibratedRecall:0.000} with {calibratedCalls:0} scorer calls per request ({ItemCount / calibratedCalls:0}x fewer than scoring everything).");
Console.WriteLine("Settings a service loads at start-up (RerankingOptions.FromJson):");
Console.WriteLine(report.Settings.ToJson());

(double Recall, double Calls) Measure(RerankingOptions settings)
{
    var pipeline = new RerankingPipeline<RentalRequest>(index, scorer, settings);
    RerankingResults results = pipeline.RerankBatch(evaluation);
    long[][] found = Enumerable.Range(0, evaluation.Length).Select(q => results[q].ToArray().Select(h => h.Id).ToArray()).ToArray();
    return (Recall.AtK(truth, found, K), results.PairsScored / (double)evaluation.Length);
}

static string StageName(CalibrationStage stage) => stage switch
{
    CalibrationStage.ExhaustiveScoring => "scoring the whole collection for the sample requests",
    CalibrationStage.Tuning => "tuning depths on the tuning requests",
    CalibrationStage.Verifying => "verifying on held-out requests",
    _ => stage.ToString(),
};

void Print(RerankedHit hit)
{
    RentalItem item = catalogue.Items[(int)hit.Id];
    string free = item.UnitsFree == 0 ? "booked" : $"{item.UnitsFree} free";
    Console.WriteLine($"    score {hit.Score,6:0.000}  retrieval rank {hit.RetrievalRank + 1,4}  #{item.Id,-6} {item.Kind,-15} {RentalCatalogue.Kilometres(request.HomeDepot, item.Depot),3:0} km  {free,-7} {item.DailyFee,5:0.0} cr");
}

internal sealed class InlineProgress(Action<CalibrationProgress> report) : IProgress<CalibrationProgress>
{
    public void Report(CalibrationProgress value) => report(value);
}

using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes.Graph;
using VectorKit.Reranking;
using VectorKit.Tests.Evaluation;

namespace VectorKit.Tests.Reranking;

/// <summary>Calibration against a scorer whose exhaustive top k is known in closed form (see <see cref="LineWorld"/>).</summary>
public class CalibrationTests
{
    private const int K = 10;

    [Fact]
    public void ExhaustiveScoring_EqualsTheClosedForm()
    {
        var world = new LineWorld(3000, 20, seed: 5);
        double[] queries = world.Queries(50, seed: 6);
        long[][] top = RerankingCalibration.ScoreEverything(new LineWorld.Scorer(world.Count), queries, Enumerable.Range(0, world.Count).Select(i => (long)i).ToArray(), K);
        for (int q = 0; q < queries.Length; q++)
        {
            Assert.Equal(world.ClosedFormTop(queries[q], K), top[q]);
        }
    }

    [Fact]
    public void CalibratedDepths_MeetTheTargetOnHeldOutAndFreshQueries_WithinTheStatedSamplingError()
    {
        var world = new LineWorld(5000, 20, seed: 11);
        using var index = world.BuildIndex();
        var scorer = new LineWorld.Scorer(world.Count);
        var options = new CalibrationOptions { TargetRecall = 0.9, FinalCount = K, Seed = 3 };
        double[] sample = world.Queries(RerankingCalibration.RequiredSampleSize(options) + 20, seed: 12);
        var progress = new SynchronousProgress<CalibrationProgress>();

        CalibrationReport report = RerankingCalibration.Calibrate(index, scorer, sample, options, progress);

        // Naive pruning (retrieve only k) loses recall here, so the calibration had something to do.
        Assert.True(report.Settings.RetrievalDepth > K, report.ToTable());
        Assert.Equal(K, report.Settings.FinalCount);
        Assert.True(report.TargetReachedOnTuning, report.ToTable());
        Assert.True(report.WithinSamplingError, report.ToTable());
        Assert.True(report.HeldOutRecallLow <= report.HeldOutRecall && report.HeldOutRecall <= report.HeldOutRecallHigh);
        Assert.True(report.HeldOutRecallHigh - report.HeldOutRecallLow <= 2 * options.MaxUncertainty + 1e-9, report.ToTable());
        CalibrationStage[] phases = progress.Values.Select(p => p.Stage).ToArray();
        Assert.Equal(CalibrationStage.Verifying, phases[^1]);
        Assert.Contains(CalibrationStage.ExhaustiveScoring, phases);
        Assert.Contains(CalibrationStage.Tuning, phases);

        // The scorer's top k of 2,000 fresh queries, in closed form: the calibrated pipeline keeps the target
        // recall there, within the stated uncertainty of the held-out estimate.
        double[] fresh = world.Queries(2000, seed: 99);
        var pipeline = new RerankingPipeline<double>(index, scorer, report.Settings);
        RerankingResults results = pipeline.RerankBatch(fresh);
        var truth = fresh.Select(c => world.ClosedFormTop(c, K)).ToArray();
        var found = Enumerable.Range(0, fresh.Length).Select(q => results[q].ToArray().Select(h => h.Id).ToArray()).ToArray();
        double recall = Recall.AtK(truth, found, K);
        Assert.True(recall >= options.TargetRecall - options.MaxUncertainty, $"fresh recall {recall}\n{report.ToTable()}");

        // One depth less than chosen misses the target on the fresh queries' closed-form answer, or is near it:
        // the choice is (close to) the smallest that works.
        var shallower = new RerankingPipeline<double>(index, scorer, new RerankingOptions { FinalCount = K, RetrievalDepth = Math.Max(K, report.Settings.RetrievalDepth * 3 / 4) });
        RerankingResults fewer = shallower.RerankBatch(fresh);
        double fewerRecall = Recall.AtK(truth, Enumerable.Range(0, fresh.Length).Select(q => fewer[q].ToArray().Select(h => h.Id).ToArray()).ToArray(), K);
        Assert.True(fewerRecall < options.TargetRecall + options.MaxUncertainty, $"three quarters of the depth still gives {fewerRecall}\n{report.ToTable()}");

        // Calls per query: the chosen depth, against the whole collection for the baseline.
        StageReport scoring = report.Stages[^1];
        Assert.Equal(RerankingStage.PairwiseScoring, scoring.Stage);
        Assert.Equal(report.Settings.RetrievalDepth, scoring.ScorerCallsPerQuery);
        Assert.Equal(world.Count, report.ExhaustiveScorerCallsPerQuery);
        Assert.Equal(report.HeldOutRecall, scoring.Recall);
    }

    [Fact]
    public void Calibration_IsReproducibleForASeed()
    {
        var world = new LineWorld(2000, 10, seed: 21);
        using var index = world.BuildIndex();
        var options = new CalibrationOptions { TargetRecall = 0.9, FinalCount = 5, MaxUncertainty = 0.1, Seed = 8 };
        double[] sample = world.Queries(RerankingCalibration.RequiredSampleSize(options), seed: 22);
        CalibrationReport first = RerankingCalibration.Calibrate(index, new LineWorld.Scorer(world.Count), sample, options);
        CalibrationReport second = RerankingCalibration.Calibrate(index, new LineWorld.Scorer(world.Count), sample, options);
        Assert.Equal(first.Settings.ToJson(), second.Settings.ToJson());
        Assert.Equal(first.HeldOutRecall, second.HeldOutRecall);
        Assert.Equal(first.TuningRecall, second.TuningRecall);
    }

    [Fact]
    public void PointEstimateSelection_ChoosesNoDeeperThanTheLowerBoundRule()
    {
        var world = new LineWorld(3000, 20, seed: 51);
        using var index = world.BuildIndex();
        var options = new CalibrationOptions { TargetRecall = 0.9, FinalCount = K, MaxUncertainty = 0.08 };
        double[] sample = world.Queries(RerankingCalibration.RequiredSampleSize(options), seed: 52);
        CalibrationReport bound = RerankingCalibration.Calibrate(index, new LineWorld.Scorer(world.Count), sample, options);
        CalibrationReport point = RerankingCalibration.Calibrate(index, new LineWorld.Scorer(world.Count), sample, new CalibrationOptions { TargetRecall = 0.9, FinalCount = K, MaxUncertainty = 0.08, Selection = CalibrationSelection.PointEstimate });
        Assert.True(point.Settings.RetrievalDepth <= bound.Settings.RetrievalDepth, point.ToTable() + bound.ToTable());
        Assert.True(point.TuningRecall >= 0.9);
        Assert.True(point.Settings.RetrievalDepth > K);
    }

    [Fact]
    public void ExactStage_IsCalibratedWhenAsked()
    {
        var world = new LineWorld(3000, 15, seed: 31);
        using var index = world.BuildIndex();
        var options = new CalibrationOptions { TargetRecall = 0.9, FinalCount = K, MaxUncertainty = 0.1, ExactRescoringOverfetch = 2 };
        double[] sample = world.Queries(RerankingCalibration.RequiredSampleSize(options), seed: 32);
        CalibrationReport report = RerankingCalibration.Calibrate(index, new LineWorld.Scorer(world.Count), sample, options);
        Assert.NotNull(report.Settings.ExactRescoringDepth);
        Assert.Equal([RerankingStage.Retrieval, RerankingStage.ExactRescoring, RerankingStage.PairwiseScoring], report.Stages.Select(s => s.Stage));
        Assert.Equal(report.Settings.ExactRescoringDepth!.Value, report.Stages[^1].ScorerCallsPerQuery);

        // The exact index's distances are already exact, so the exact order is the retrieval order.
        Assert.True(report.Stages[1].Recall <= report.Stages[0].Recall);
        Assert.True(report.WithinSamplingError, report.ToTable());
    }

    [Fact]
    public void SearchWidths_AreTriedOnAGraphIndex_AndTheChosenOneIsReported()
    {
        var world = new LineWorld(3000, 20, seed: 61);
        using var graph = new GraphIndex(2, DistanceMetric.SquaredEuclidean, new GraphIndexOptions { Seed = 2, MaxDegreeOfParallelism = 1 });
        graph.AddRange(Enumerable.Range(0, world.Count).Select(i => (long)i).ToArray(), world.Vectors);
        var options = new CalibrationOptions { TargetRecall = 0.9, FinalCount = K, MaxUncertainty = 0.08, SearchWidths = [16, 400], MaxDegreeOfParallelism = 1 };
        double[] sample = world.Queries(RerankingCalibration.RequiredSampleSize(options), seed: 62);
        CalibrationReport report = RerankingCalibration.Calibrate(graph, new LineWorld.Scorer(world.Count), sample, options);
        Assert.Contains(report.Settings.SearchWidth!.Value, new[] { 16, 400 });
        Assert.Equal(report.Settings.SearchWidth, report.Stages[0].SearchWidth);
        Assert.Equal(1, report.Settings.MaxDegreeOfParallelism);
        Assert.True(report.WithinSamplingError, report.ToTable());
    }

    [Fact]
    public void Cancellation_StopsACalibration()
    {
        var world = new LineWorld(2000, 10, seed: 71);
        using var index = world.BuildIndex();
        var options = new CalibrationOptions { TargetRecall = 0.9, FinalCount = K };
        double[] sample = world.Queries(RerankingCalibration.RequiredSampleSize(options), seed: 72);
        using var cancel = new CancellationTokenSource();

        // Cancel from the progress callback once the exhaustive pass is under way.
        var progress = new CancelAfter(cancel, after: 3);
        Assert.ThrowsAny<OperationCanceledException>(() => RerankingCalibration.Calibrate(index, new LineWorld.Scorer(world.Count), sample, options, progress, cancel.Token));
        Assert.True(progress.Reports < sample.Length, $"{progress.Reports} progress reports after cancelling");
    }

    [Fact]
    public void Report_SerialisesAndTheSettingsRoundTrip()
    {
        var world = new LineWorld(1000, 10, seed: 41);
        using var index = world.BuildIndex();
        var options = new CalibrationOptions { TargetRecall = 0.8, FinalCount = 5, MaxUncertainty = 0.1 };
        double[] sample = world.Queries(RerankingCalibration.RequiredSampleSize(options), seed: 42);
        CalibrationReport report = RerankingCalibration.Calibrate(index, new LineWorld.Scorer(world.Count), sample, options);
        RerankingOptions loaded = RerankingOptions.FromJson(report.Settings.ToJson());
        Assert.Equal(report.Settings.RetrievalDepth, loaded.RetrievalDepth);
        Assert.Equal(report.Settings.FinalCount, loaded.FinalCount);
        Assert.Equal(report.Settings.SearchWidth, loaded.SearchWidth);
        Assert.Equal(report.Settings.ExactRescoringDepth, loaded.ExactRescoringDepth);
        string json = report.ToJson();
        Assert.Contains("\"HeldOutRecall\"", json);
        Assert.Contains("\"Stages\"", json);
        Assert.Contains("pairwise scoring", report.ToTable());
    }

    private sealed class CancelAfter(CancellationTokenSource source, int after) : IProgress<CalibrationProgress>
    {
        private int _reports;

        public int Reports => Volatile.Read(ref _reports);

        public void Report(CalibrationProgress value)
        {
            if (Interlocked.Increment(ref _reports) == after)
            {
                source.Cancel();
            }
        }
    }
}

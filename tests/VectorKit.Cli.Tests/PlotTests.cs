using SkiaSharp;
using VectorKit.Cli.Commands;

namespace VectorKit.Cli.Tests;

/// <summary>The PNGs: opened with an image decoder, of the promised size, with the curves actually drawn.</summary>
public sealed class PlotTests : IDisposable
{
    private readonly string _folder = Directory.CreateTempSubdirectory("vk-cli-plot-").FullName;

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    [Fact]
    public void RecallCurves_AreDrawnInEachSeriesColour()
    {
        string path = Path.Combine(_folder, "curves.png");
        PlotCommand.DrawCurves(
        [
            new PlotCommand.Curve("graph, float32", 10, [0.90, 0.97, 0.995], [20_000, 8_000, 2_000]),
            new PlotCommand.Curve("inverted-file, float32", 10, [0.85, 0.95, 0.99], [9_000, 3_000, 900]),
        ],
            path);
        using SKBitmap image = Decode(path);
        Assert.Equal(1000, image.Width);
        Assert.Equal(650, image.Height);

        // The first two colours of the plotting library's default palette (Category10): blue, then orange.
        Assert.True(CountNear(image, new SKColor(0x1F, 0x77, 0xB4)) > 300, "the first curve is not drawn");
        Assert.True(CountNear(image, new SKColor(0xFF, 0x7F, 0x0E)) > 300, "the second curve is not drawn");
    }

    [Fact]
    public void AnEmptyPlot_HasNoCurvePixels_SoTheCheckAboveCanFail()
    {
        string path = Path.Combine(_folder, "empty.png");
        PlotCommand.DrawCurves([], path);
        using SKBitmap image = Decode(path);
        Assert.Equal(0, CountNear(image, new SKColor(0x1F, 0x77, 0xB4)));
    }

    [Fact]
    public void RecallHistogram_DrawsBarsOfTheExpectedHeights()
    {
        string path = Path.Combine(_folder, "histogram.png");
        PlotCommand.DrawHistogram(new PlotCommand.RecallHistogram("graph, float32", 10, [0.8, 0.9, 1.0], [5, 60, 935]), path);
        using SKBitmap image = Decode(path);
        Assert.Equal(1000, image.Width);
        int bar = CountNear(image, new SKColor(0x1F, 0x77, 0xB4));

        // The tallest bar (935 of 1,000 queries) fills most of the plot's height: thousands of pixels.
        Assert.True(bar > 5_000, $"only {bar} bar pixels");
    }

    [Fact]
    public void RerankStages_FromACalibrationReportsJson_AreDrawnThroughTheProcess()
    {
        // A real calibration report: a graph index and a scorer that re-weighs the dimensions, calibrated by the library.
        const int dimension = 8, items = 2_000;
        var random = new Random(5);
        float[] vectors = [.. Enumerable.Range(0, items * dimension).Select(_ => (float)(random.NextDouble() - 0.5))];
        using var index = new VectorKit.Indexes.Graph.GraphIndex(dimension, VectorKit.Distance.DistanceMetric.InnerProduct);
        index.AddRange([.. Enumerable.Range(0, items).Select(i => (long)i)], vectors);
        var options = new VectorKit.Reranking.CalibrationOptions { TargetRecall = 0.9, FinalCount = 5, MaxUncertainty = 0.1, Seed = 2 };
        float[][] sample = [.. Enumerable.Range(0, VectorKit.Reranking.RerankingCalibration.RequiredSampleSize(options))
            .Select(_ => Enumerable.Range(0, dimension).Select(_ => (float)(random.NextDouble() - 0.5)).ToArray())];
        VectorKit.Reranking.CalibrationReport report = VectorKit.Reranking.RerankingCalibration.Calibrate(index, new WeighedScorer(vectors, dimension), sample, options);
        File.WriteAllText(Path.Combine(_folder, "calibration.json"), report.ToJson());
        Tool.Outcome o = Tool.Run(_folder, "--quiet", "plot", "rerank-stages", "calibration.json", "-o", "stages.png");
        Assert.True(o.ExitCode == 0, o.Error);
        using SKBitmap image = Decode(Path.Combine(_folder, "stages.png"));
        Assert.Equal(1000, image.Width);

        // One bar per stage on a 0–1.1 axis; each stage's recall is well above zero, so the bars fill much of the plot.
        Assert.True(report.Stages.Count >= 2);
        Assert.True(CountNear(image, new SKColor(0x1F, 0x77, 0xB4)) > 10_000 * report.Stages.Count);
        File.WriteAllText(Path.Combine(_folder, "broken.json"), "{\"Stages\": 3}");
        Tool.Outcome broken = Tool.Run(_folder, "--quiet", "plot", "rerank-stages", "broken.json", "-o", "broken.png");
        Assert.Equal(3, broken.ExitCode);
        Assert.False(File.Exists(Path.Combine(_folder, "broken.png")));
    }

    private static SKBitmap Decode(string path)
    {
        Assert.True(File.Exists(path));
        Assert.Equal(new byte[] { 0x89, 0x50, 0x4E, 0x47 }, File.ReadAllBytes(path)[..4]);
        return SKBitmap.Decode(path) ?? throw new InvalidDataException($"{path} does not decode");
    }

    private static int CountNear(SKBitmap image, SKColor colour)
    {
        int count = 0;
        for (int y = 0; y < image.Height; y++)
        {
            for (int x = 0; x < image.Width; x++)
            {
                SKColor p = image.GetPixel(x, y);
                if (Math.Abs(p.Red - colour.Red) + Math.Abs(p.Green - colour.Green) + Math.Abs(p.Blue - colour.Blue) < 30)
                {
                    count++;
                }
            }
        }

        return count;
    }

    /// <summary>A pairwise score that weighs the second half of the dimensions three times as much as the first.</summary>
    private sealed class WeighedScorer(float[] items, int dimension) : VectorKit.Reranking.PairwiseScorer<float[]>
    {
        public override void WriteRetrievalVector(float[] query, Span<float> destination) => query.CopyTo(destination);

        public override int Score(float[] query, ReadOnlySpan<long> candidateIds, Span<float> scores)
        {
            for (int i = 0; i < candidateIds.Length; i++)
            {
                float sum = 0;
                for (int j = 0; j < dimension; j++)
                {
                    sum += query[j] * items[((int)candidateIds[i] * dimension) + j] * (j < dimension / 2 ? 1f : 3f);
                }

                scores[i] = sum;
            }

            return candidateIds.Length;
        }
    }
}

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
}

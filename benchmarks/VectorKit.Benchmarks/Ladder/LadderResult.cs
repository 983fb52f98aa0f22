using System.Globalization;

namespace VectorKit.Benchmarks.Ladder;

/// <summary>One search setting of one kind on one rung.</summary>
internal sealed record LadderPoint(string Setting, double Recall, double QueriesPerSecond);

/// <summary>What one step measured on one rung, saved as a small text file between the step's process and the ladder.</summary>
internal sealed class LadderResult
{
    public string Kind { get; init; } = "";

    public double BuildSeconds { get; init; }

    public double BytesPerVector { get; init; }

    public double PeakResidentMiB { get; set; }

    public string Notes { get; init; } = "";

    public List<LadderPoint> Points { get; } = [];

    /// <summary>The fastest setting whose recall@10 meets <paramref name="target"/>, or null.</summary>
    public LadderPoint? Cheapest(double target)
        => Points.Where(p => p.Recall >= target).OrderByDescending(p => p.QueriesPerSecond).FirstOrDefault();

    public void Save(string path)
    {
        using var writer = new StreamWriter(path + ".partial");
        writer.WriteLine($"kind\t{Kind}");
        writer.WriteLine(F($"build_seconds\t{BuildSeconds:R}"));
        writer.WriteLine(F($"bytes_per_vector\t{BytesPerVector:R}"));
        writer.WriteLine(F($"peak_resident_mib\t{PeakResidentMiB:R}"));
        writer.WriteLine($"notes\t{Notes}");
        foreach (LadderPoint p in Points)
        {
            writer.WriteLine(F($"point\t{p.Setting}\t{p.Recall:R}\t{p.QueriesPerSecond:R}"));
        }

        writer.Close();
        File.Move(path + ".partial", path, overwrite: true);
    }

    public static LadderResult Load(string path)
    {
        var fields = new Dictionary<string, string>();
        var points = new List<LadderPoint>();
        foreach (string line in File.ReadLines(path))
        {
            string[] parts = line.Split('\t');
            if (parts[0] == "point")
            {
                points.Add(new LadderPoint(parts[1], double.Parse(parts[2], CultureInfo.InvariantCulture), double.Parse(parts[3], CultureInfo.InvariantCulture)));
            }
            else
            {
                fields[parts[0]] = parts[1];
            }
        }

        var result = new LadderResult
        {
            Kind = fields["kind"],
            BuildSeconds = double.Parse(fields["build_seconds"], CultureInfo.InvariantCulture),
            BytesPerVector = double.Parse(fields["bytes_per_vector"], CultureInfo.InvariantCulture),
            PeakResidentMiB = double.Parse(fields["peak_resident_mib"], CultureInfo.InvariantCulture),
            Notes = fields["notes"],
        };
        result.Points.AddRange(points);
        return result;
    }

    private static string F(FormattableString s) => s.ToString(CultureInfo.InvariantCulture);
}

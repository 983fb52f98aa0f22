using System.Globalization;

namespace VectorKit.Benchmarks.Ladder;

/// <summary>
/// One search setting of one kind on one rung: queries/s by wall clock and by the searching thread's CPU time (NaN when
/// not measured), each the best of its passes.
/// </summary>
internal sealed record LadderPoint(string Setting, double Recall, double QueriesPerSecond, double CpuQueriesPerSecond = double.NaN)
{
    /// <summary>The rate settings are ranked by: per CPU-second when measured (steadier on a shared machine), else wall clock.</summary>
    public double Rank => double.IsNaN(CpuQueriesPerSecond) ? QueriesPerSecond : CpuQueriesPerSecond;
}

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
        => Points.Where(p => p.Recall >= target).OrderByDescending(p => p.Rank).FirstOrDefault();

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
            writer.WriteLine(F($"point\t{p.Setting}\t{p.Recall:R}\t{p.QueriesPerSecond:R}\t{p.CpuQueriesPerSecond:R}"));
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
                double cpu = parts.Length > 4 ? double.Parse(parts[4], CultureInfo.InvariantCulture) : double.NaN;
                points.Add(new LadderPoint(parts[1], double.Parse(parts[2], CultureInfo.InvariantCulture), double.Parse(parts[3], CultureInfo.InvariantCulture), cpu));
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

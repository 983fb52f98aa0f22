using System.Globalization;
using System.Text.Json;

namespace VectorKit.Cli;

/// <summary>
/// What <c>build</c> measured, kept beside the index as <c>&lt;index&gt;.build.json</c> so <c>evaluate</c> can report
/// the build time (the index file itself does not store it).
/// </summary>
internal sealed record BuildReport(string IndexPath, string Label, int Count, int Dimension, TimeSpan BuildTime, long FileBytes, long MemoryBytes, string DataPath)
{
    public static string PathFor(string indexPath) => indexPath + ".build.json";

    public void Save()
    {
        string path = PathFor(IndexPath);
        string temporary = Path.Combine(Path.GetDirectoryName(path) ?? ".", $".{Path.GetFileName(path)}.{Guid.NewGuid():N}.tmp");
        using (var stream = File.Create(temporary))
        using (var json = new Utf8JsonWriter(stream, new JsonWriterOptions { Indented = true }))
        {
            json.WriteStartObject();
            json.WriteString("index", Path.GetFileName(IndexPath));
            json.WriteString("label", Label);
            json.WriteNumber("count", Count);
            json.WriteNumber("dimension", Dimension);
            json.WriteNumber("buildSeconds", Math.Round(BuildTime.TotalSeconds, 3));
            json.WriteNumber("fileBytes", FileBytes);
            json.WriteNumber("memoryBytes", MemoryBytes);
            json.WriteString("data", DataPath);
            json.WriteEndObject();
        }

        File.Move(temporary, path, overwrite: true);
    }

    /// <summary>The build time recorded beside <paramref name="indexPath"/>, or null when there is no readable record.</summary>
    public static TimeSpan? TryReadBuildTime(string indexPath)
    {
        try
        {
            using JsonDocument document = JsonDocument.Parse(File.ReadAllBytes(PathFor(indexPath)));
            return TimeSpan.FromSeconds(document.RootElement.GetProperty("buildSeconds").GetDouble());
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException or JsonException or KeyNotFoundException or InvalidOperationException)
        {
            return null;
        }
    }

    public override string ToString() => string.Create(CultureInfo.InvariantCulture, $"{Label}, {Count} × {Dimension}, {BuildTime.TotalSeconds:F2} s");
}

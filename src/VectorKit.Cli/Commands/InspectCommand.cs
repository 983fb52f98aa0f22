using System.CommandLine;
using System.Globalization;
using System.Text.Json;
using Spectre.Console;
using VectorKit.Persistence;

namespace VectorKit.Cli.Commands;

/// <summary><c>inspect</c>: what a saved index file holds, from its header, without loading the vectors.</summary>
internal static class InspectCommand
{
    public static Command Create(CommandContext context)
    {
        var file = new Argument<string>("index") { Description = "The index file." };
        var verify = new Option<bool>("--verify") { Description = "Also read every section through its checksum (reads the whole file; keeps nothing in memory)." };
        var json = new Option<bool>("--json") { Description = "Print JSON instead of tables." };
        var command = new Command("inspect", "Show the kind, dimension, metric, count, storage variant, settings and section sizes of a saved index without loading it.")
        {
            file, verify, json,
        };
        command.SetAction(parsed =>
        {
            string path = parsed.GetValue(file)!;
            bool check = parsed.GetValue(verify);
            IndexFileSummary summary = VectorFiles.Guard(path, () => IndexFile.Inspect(path, check, parsed.GetValue(CliApp.UntrustedIndex) ? IndexLoadOptions.Untrusted : IndexLoadOptions.Default, context.Stop));
            string storage = Storage(summary);
            string checksums = summary.SectionsVerified ? "header and every section verified" : "header verified; sections not read (use --verify)";
            if (parsed.GetValue(json))
            {
                using var buffer = new MemoryStream();
                using (var writer = new Utf8JsonWriter(buffer, new JsonWriterOptions { Indented = true }))
                {
                    writer.WriteStartObject();
                    writer.WriteString("kind", KindName(summary.Kind));
                    writer.WriteString("metric", MetricName(summary.Metric));
                    writer.WriteNumber("dimension", summary.Dimension);
                    writer.WriteNumber("count", summary.Count);
                    writer.WriteNumber("storedRows", summary.StoredRows);
                    writer.WriteString("storage", storage);
                    writer.WriteNumber("formatVersion", summary.FormatVersion);
                    writer.WriteNumber("fileBytes", summary.FileBytes);
                    writer.WriteBoolean("sectionsVerified", summary.SectionsVerified);
                    writer.WriteStartObject("settings");
                    foreach ((string key, double value) in summary.Settings)
                    {
                        writer.WriteNumber(key, value);
                    }

                    writer.WriteEndObject();
                    writer.WriteStartArray("sections");
                    foreach (IndexFileSection section in summary.Sections)
                    {
                        writer.WriteStartObject();
                        writer.WriteString("name", section.Name);
                        writer.WriteNumber("id", section.Id);
                        writer.WriteNumber("bytes", section.PayloadBytes);
                        writer.WriteEndObject();
                    }

                    writer.WriteEndArray();
                    writer.WriteEndObject();
                }

                context.Output.WriteLine(System.Text.Encoding.UTF8.GetString(buffer.ToArray()));
                return ExitCodes.Success;
            }

            IAnsiConsole console = context.Tables();
            var facts = new Table().AddColumn("property").AddColumn("value");
            facts.Title = new TableTitle(Path.GetFileName(path));
            facts.AddRow("kind", KindName(summary.Kind));
            facts.AddRow("storage", storage);
            facts.AddRow("metric", MetricName(summary.Metric));
            facts.AddRow("dimension", summary.Dimension.ToString(CultureInfo.InvariantCulture));
            facts.AddRow("vectors", summary.Count.ToString("N0", CultureInfo.InvariantCulture));
            facts.AddRow("stored rows", summary.StoredRows.ToString("N0", CultureInfo.InvariantCulture));
            facts.AddRow("file", $"{summary.FileBytes:N0} bytes, format version {summary.FormatVersion}");
            facts.AddRow("checksums", checksums);
            console.Write(facts);
            var settings = new Table().AddColumn("setting (as stored)").AddColumn(new TableColumn("value").RightAligned());
            foreach ((string key, double value) in summary.Settings)
            {
                settings.AddRow(key, value.ToString(CultureInfo.InvariantCulture));
            }

            console.Write(settings);
            var sections = new Table().AddColumn("section").AddColumn(new TableColumn("bytes").RightAligned());
            foreach (IndexFileSection section in summary.Sections)
            {
                sections.AddRow(section.Name, section.PayloadBytes.ToString("N0", CultureInfo.InvariantCulture));
            }

            console.Write(sections);
            return ExitCodes.Success;
        });
        return command;
    }

    private static string KindName(IndexKind kind) => kind switch
    {
        IndexKind.Exact => "exact",
        IndexKind.Graph => "graph",
        IndexKind.InvertedFile => "inverted-file",
        _ => $"unknown ({(int)kind})",
    };

    private static string MetricName(Distance.DistanceMetric metric) => metric switch
    {
        Distance.DistanceMetric.SquaredEuclidean => "squared-euclidean",
        Distance.DistanceMetric.InnerProduct => "inner-product",
        Distance.DistanceMetric.Cosine => "cosine",
        _ => $"unknown ({(int)metric})",
    };

    /// <summary>The storage variant from the stored fields (absent = float32, as the codecs write it).</summary>
    private static string Storage(IndexFileSummary summary)
    {
        if (summary.Settings.TryGetValue("vector-storage", out double encoding))
        {
            return IndexSpec.StorageName((Indexes.VectorEncoding)(int)encoding);
        }

        if (summary.Settings.TryGetValue("list-storage", out double list))
        {
            // The inverted file stores an index into its own list of encodings: float32, product codes, 8-bit.
            return list switch { 0 => "float32", 1 => "product-codes", 2 => "8bit", _ => $"unknown ({list})" };
        }

        return "float32";
    }
}

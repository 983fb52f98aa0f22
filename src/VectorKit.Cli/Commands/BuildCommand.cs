using System.CommandLine;
using System.Diagnostics;
using VectorKit.Indexes;
using VectorKit.IO;
using VectorKit.Persistence;

namespace VectorKit.Cli.Commands;

/// <summary><c>build</c>: streams a vector file into an index of any kind and storage variant and saves it atomically.</summary>
internal static class BuildCommand
{
    public static Command Create(CommandContext context)
    {
        var data = new Option<string>("--data") { Description = "The vectors to index (.fvecs, .bvecs, .npy, MNIST idx, optionally .gz, or .csv).", Required = true };
        var output = new Option<string>("--output", "-o") { Description = "The index file to write (replaced atomically).", Required = true };
        var format = Shared.DataFormatOption();
        var kind = new Option<string>("--kind") { Description = "exact, graph or inverted-file.", DefaultValueFactory = _ => "graph" };
        var storage = new Option<string>("--storage") { Description = "float32, 8bit or product-codes (inverted file only).", DefaultValueFactory = _ => "float32" };
        var metric = new Option<string>("--metric") { Description = "squared-euclidean, inner-product or cosine.", DefaultValueFactory = _ => "squared-euclidean" };
        var ids = new Option<string?>("--ids") { Description = "Item ids, one per data row (.ivecs or .npy with one column, or text with one id per line). Default: row numbers from 0." };
        var sample = new Option<int?>("--training-rows") { Description = "Rows used to train inverted-file lists and 8-bit or product codes. Default: min(rows, 100,000)." };
        var spread = new Option<string>("--training-pick") { Description = "Which rows train: 'first' (the first N; no extra read) or 'spread' (every (rows/N)-th row; one extra pass over the file, for files sorted by category).", DefaultValueFactory = _ => "first" };
        var links = new Option<int?>("--links-per-node") { Description = "Graph: links per node." };
        var buildWidth = new Option<int?>("--build-width") { Description = "Graph: candidates kept while linking a new node." };
        var width = new Option<int?>("--search-width") { Description = "Default search width stored in the index (graph: candidates kept; inverted file: lists probed)." };
        var lists = new Option<int?>("--lists") { Description = "Inverted file: number of lists." };
        var codeBytes = new Option<int?>("--code-bytes") { Description = "Product codes: bytes per vector (must divide the dimension)." };
        var rescore = Shared.RescoreDepth();
        var seed = new Option<int?>("--seed") { Description = "Random seed for graph levels and k-means." };
        var external = new Option<bool>("--full-vectors-in-data-file") { Description = "8-bit or product-code storage: keep no full vectors in the index; re-score from the data file (.fvecs or .npy), given again to search with --full-vectors." };
        var dataRows = Shared.DataRows();
        var block = new Option<int>("--rows-per-block") { Description = "Rows read and added at a time.", DefaultValueFactory = _ => 8192 };
        var command = new Command("build", "Build an index from a vector file and save it.")
        {
            data, output, format, kind, storage, metric, ids, sample, spread, links, buildWidth, width, lists, codeBytes, rescore, seed, external, dataRows, block,
        };
        command.SetAction(parsed =>
        {
            var spec = new IndexSpec(
                IndexSpec.ParseKind(parsed.GetValue(kind)!),
                IndexSpec.ParseStorage(parsed.GetValue(storage)!),
                IndexSpec.ParseMetric(parsed.GetValue(metric)!),
                parsed.GetValue(links),
                parsed.GetValue(buildWidth),
                parsed.GetValue(width),
                parsed.GetValue(lists),
                parsed.GetValue(codeBytes),
                parsed.GetValue(rescore),
                parsed.GetValue(seed),
                parsed.GetValue(external));
            BuildReport report = Run(
                context, parsed, spec, parsed.GetValue(data)!, Shared.ParseFormat(parsed.GetValue(format)!), parsed.GetValue(ids),
                parsed.GetValue(output)!, parsed.GetValue(sample), Shared.Positive(parsed.GetValue(block), "--rows-per-block"),
                Shared.PositiveOrNull(parsed.GetValue(dataRows), "--data-rows"),
                parsed.GetValue(spread) switch
                {
                    "first" => false,
                    "spread" => true,
                    var other => throw new UsageException($"--training-pick is '{other}'; expected first or spread"),
                });
            context.Output.WriteLine($"built {report.Label} index of {report.Count:N0} vectors × {report.Dimension} in {Shared.Seconds(report.BuildTime)}; saved to {report.IndexPath} ({report.FileBytes:N0} bytes)");
            return ExitCodes.Success;
        });
        return command;
    }

    public static BuildReport Run(CommandContext context, ParseResult parsed, IndexSpec spec, string dataPath, DataFormat format, string? idsPath, string outputPath, int? trainingRows, int rowsPerBlock, long? maxRows = null, bool spreadSample = false)
    {
        CancellationToken stop = context.Stop;
        string outputFolder = Path.GetDirectoryName(Path.GetFullPath(outputPath)) ?? ".";
        if (!Directory.Exists(outputFolder))
        {
            throw new OutputFileException(Path.GetFullPath(outputPath), $"its folder '{outputFolder}' does not exist");
        }

        (int dimension, long count) = VectorFiles.Shape(dataPath, format, stop);
        count = Math.Min(count, maxRows ?? count);
        if (count > int.MaxValue)
        {
            throw new InputFileException(dataPath, $"it holds {count:N0} rows; an index holds at most {int.MaxValue:N0}");
        }

        long[]? ids = idsPath is null ? null : VectorFiles.ReadIds(idsPath, stop);
        if (ids is not null && ids.Length < count)
        {
            throw new InputFileException(idsPath!, $"it holds {ids.Length:N0} ids; the data file '{dataPath}' has {count:N0} rows");
        }

        if (trainingRows is <= 0)
        {
            throw new UsageException($"--training-rows must be at least 1; got {trainingRows}");
        }

        if (spec.ExternalFullVectors && maxRows is not null)
        {
            throw new UsageException("--full-vectors-in-data-file reads rows by their place in the whole data file; it does not go with --data-rows");
        }

        var clock = Stopwatch.StartNew();
        using FileVectorSource? fullVectors = spec.ExternalFullVectors ? VectorFiles.OpenFullVectors(dataPath, ids) : null;
        using VectorIndex index = spec.Create(dimension, fullVectors);
        if (spec.NeedsTraining)
        {
            int rows = (int)Math.Min(count, trainingRows ?? 100_000);
            // 'spread' takes rows 0, stride, 2·stride, ... so a file sorted by category still trains on every part of it.
            long stride = spreadSample ? Math.Max(1, count / rows) : 1;
            if (!parsed.GetValue(CliApp.Quiet))
            {
                context.Error.WriteLine(spreadSample ? $"training on {rows:N0} rows, one in every {stride:N0}..." : $"training on the first {rows:N0} rows...");
            }

            var sample = new float[(long)rows * dimension];
            int filled = 0;
            long at = 0;
            foreach (VectorSet blockSet in VectorFiles.ReadBlocks(dataPath, format, 0, spreadSample ? count : rows, rowsPerBlock, stop))
            {
                for (int i = 0; i < blockSet.Count && filled < rows; i++, at++)
                {
                    if (at % stride == 0)
                    {
                        blockSet.Row(i).CopyTo(sample.AsSpan(filled * dimension));
                        filled++;
                    }
                }

                if (filled == rows)
                {
                    break;
                }
            }

            try
            {
                index.Train(sample, cancellationToken: stop);
            }
            catch (ArgumentException e)
            {
                throw new UsageException($"training failed: {e.Message}");
            }
        }

        using (ProgressLine progress = context.Progress(parsed, "build", "vectors", count))
        {
            long row = 0;
            long[] blockIds = new long[rowsPerBlock];
            foreach (VectorSet blockSet in VectorFiles.ReadBlocks(dataPath, format, 0, count, rowsPerBlock, stop))
            {
                for (int i = 0; i < blockSet.Count; i++)
                {
                    blockIds[i] = ids is null ? row + i : ids[row + i];
                }

                try
                {
                    index.AddRange(blockIds.AsSpan(0, blockSet.Count), blockSet.Data.AsSpan(0, blockSet.Count * dimension), progress.Within(row), stop);
                }
                catch (ArgumentException e)
                {
                    throw new InputFileException(idsPath ?? dataPath, $"rows {row:N0}–{row + blockSet.Count - 1:N0}: {e.Message}");
                }

                row += blockSet.Count;
                progress.AtLeast(row);
            }
        }

        TimeSpan buildTime = clock.Elapsed;
        IndexFile.Save(index, outputPath, stop);
        var report = new BuildReport(Path.GetFullPath(outputPath), IndexSpec.Label(index), index.Count, dimension, buildTime, new FileInfo(outputPath).Length, index.MemoryBytes, Path.GetFullPath(dataPath));
        report.Save();
        return report;
    }
}

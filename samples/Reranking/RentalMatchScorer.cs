using VectorKit.Reranking;

namespace RerankingSample;

/// <summary>
/// The co-op's pairwise scorer: how well an item suits a request. A fixed-weight two-layer network (seeded weights
/// standing in for a trained model) reads the element-wise product of the taste vectors, and business terms add what
/// the embedding cannot know: a fully booked item is useless, every kilometre to the item's depot costs, and a fee
/// over budget costs. The score is therefore <em>not</em> a monotone function of embedding similarity: a close
/// match three depots away can lose to a weaker one at the member's own depot.
/// </summary>
internal sealed class RentalMatchScorer : PairwiseScorer<RentalRequest>
{
    private const int Hidden = 16;
    private readonly RentalCatalogue _catalogue;
    private readonly float[] _inputWeights;   // Hidden × dimension, row after row
    private readonly float[] _hiddenBias = new float[Hidden];
    private readonly float[] _outputWeights = new float[Hidden];
    private long _pairs;

    public RentalMatchScorer(RentalCatalogue catalogue, int seed)
    {
        _catalogue = catalogue;
        int d = catalogue.Dimension;
        var random = new Random(seed);
        _inputWeights = new float[Hidden * d];
        for (int i = 0; i < _inputWeights.Length; i++)
        {
            // Every hidden unit leans towards plain similarity (weight 1 per dimension) with a learned-looking twist.
            _inputWeights[i] = 1f + (float)(3.0 * (random.NextDouble() - 0.5));
        }

        for (int h = 0; h < Hidden; h++)
        {
            _hiddenBias[h] = (float)(0.4 * (random.NextDouble() - 0.5));
            _outputWeights[h] = (float)(0.6 + (0.8 * random.NextDouble())) / Hidden;
        }
    }

    /// <summary>Query–item pairs scored so far.</summary>
    public long PairsScored => Interlocked.Read(ref _pairs);

    public override void WriteRetrievalVector(RentalRequest query, Span<float> destination) => query.Taste.CopyTo(destination);

    public override int Score(RentalRequest query, ReadOnlySpan<long> candidateIds, Span<float> scores)
    {
        int d = _catalogue.Dimension;
        Span<float> product = stackalloc float[d];
        for (int i = 0; i < candidateIds.Length; i++)
        {
            ReadOnlySpan<float> item = _catalogue.VectorOf(candidateIds[i]);
            for (int j = 0; j < d; j++)
            {
                product[j] = query.Taste[j] * item[j];
            }

            float taste = 0;
            for (int h = 0; h < Hidden; h++)
            {
                ReadOnlySpan<float> w = _inputWeights.AsSpan(h * d, d);
                float sum = _hiddenBias[h];
                for (int j = 0; j < d; j++)
                {
                    sum += w[j] * product[j];
                }

                taste += _outputWeights[h] * MathF.Tanh(2f * sum);
            }

            RentalItem rental = _catalogue.Items[(int)candidateIds[i]];
            float business = rental.UnitsFree == 0 ? -1.5f : 0.02f * rental.UnitsFree;
            business -= 0.012f * RentalCatalogue.Kilometres(query.HomeDepot, rental.Depot);
            business -= rental.DailyFee > query.FeeBudget ? 0.01f * (rental.DailyFee - query.FeeBudget) : 0f;
            scores[i] = taste + business;
        }

        Interlocked.Add(ref _pairs, candidateIds.Length);
        return candidateIds.Length;
    }
}

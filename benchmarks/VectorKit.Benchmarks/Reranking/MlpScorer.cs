using System.Numerics.Tensors;
using VectorKit.Reranking;

namespace VectorKit.Benchmarks.Reranking;

/// <summary>A benchmark query: a taste vector and the member's home depot (0–11 along one valley road).</summary>
public sealed record GearQuery(float[] Taste, int HomeDepot);

/// <summary>
/// A pairwise scorer with a real per-pair cost: a fixed-weight three-layer network over the features
/// <c>[q ⊙ x, |q − x|]</c> (2d → hidden → hidden/3 → 1, tanh then ReLU), plus business terms (availability, depot
/// distance) the embedding does not know. The hidden width sets the cost; the harness measures it (about 20 µs per
/// pair at the default width on the benchmark machine). Every layer runs through TensorPrimitives, so the cost is
/// arithmetic, not overhead.
/// </summary>
public sealed class MlpScorer : PairwiseScorer<GearQuery>
{
    private readonly float[] _items;
    private readonly int[] _depots;
    private readonly bool[] _booked;
    private readonly int _dimension;
    private readonly int _hidden;
    private readonly int _hidden2;
    private readonly float[] _w1;
    private readonly float[] _b1;
    private readonly float[] _w2;
    private readonly float[] _b2;
    private readonly float[] _w3;

    public MlpScorer(float[] items, int[] depots, bool[] booked, int dimension, int hidden, int seed)
    {
        _items = items;
        _depots = depots;
        _booked = booked;
        _dimension = dimension;
        _hidden = hidden;
        _hidden2 = Math.Max(1, hidden / 3);
        var random = new Random(seed);
        int inputs = 2 * dimension;

        // Weights lean towards similarity (positive on the product, slightly negative on the difference) with a
        // random twist per unit: a learned-looking bilinear form, scaled so tanh works in its curved range.
        _w1 = new float[hidden * inputs];
        for (int h = 0; h < hidden; h++)
        {
            for (int j = 0; j < inputs; j++)
            {
                double twist = random.NextDouble() - 0.5;
                _w1[(h * inputs) + j] = (float)(j < dimension ? 2.0 * (1 + twist) : 0.05 * (-1 + twist));
            }
        }

        _b1 = Enumerable.Range(0, hidden).Select(_ => (float)(0.2 * (random.NextDouble() - 0.5))).ToArray();
        _w2 = Enumerable.Range(0, _hidden2 * hidden).Select(_ => (float)((0.5 + random.NextDouble()) / hidden)).ToArray();
        _b2 = Enumerable.Range(0, _hidden2).Select(_ => (float)(0.05 * (random.NextDouble() - 0.5))).ToArray();
        _w3 = Enumerable.Range(0, _hidden2).Select(_ => (float)((0.5 + random.NextDouble()) / _hidden2)).ToArray();
    }

    public override void WriteRetrievalVector(GearQuery query, Span<float> destination) => query.Taste.CopyTo(destination);

    public override int Score(GearQuery query, ReadOnlySpan<long> candidateIds, Span<float> scores)
    {
        int d = _dimension;
        Span<float> input = stackalloc float[2 * d];
        Span<float> hidden = stackalloc float[_hidden];
        Span<float> hidden2 = stackalloc float[_hidden2];
        for (int i = 0; i < candidateIds.Length; i++)
        {
            int row = (int)candidateIds[i];
            ReadOnlySpan<float> item = _items.AsSpan(row * d, d);
            TensorPrimitives.Multiply(query.Taste, item, input[..d]);
            TensorPrimitives.Subtract(query.Taste, item, input[d..]);
            TensorPrimitives.Abs(input[d..], input[d..]);
            for (int h = 0; h < _hidden; h++)
            {
                hidden[h] = _b1[h] + TensorPrimitives.Dot(_w1.AsSpan(h * 2 * d, 2 * d), input);
            }

            TensorPrimitives.Tanh(hidden, hidden);
            for (int h = 0; h < _hidden2; h++)
            {
                hidden2[h] = MathF.Max(0, _b2[h] + TensorPrimitives.Dot(_w2.AsSpan(h * _hidden, _hidden), hidden));
            }

            float taste = TensorPrimitives.Dot(_w3, hidden2);
            float business = _booked[row] ? -1f : 0f;
            business -= 0.004f * 6f * Math.Abs(_depots[row] - query.HomeDepot);   // 6 km between depots
            scores[i] = taste + business;
        }

        return candidateIds.Length;
    }
}

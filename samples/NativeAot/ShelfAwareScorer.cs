using VectorKit.Reranking;

namespace NativeAotSample;

/// <summary>
/// A plain pairwise scorer for the sample: closeness in the catalogue's space, with a booked item pushed down when
/// the member wants only items on the shelf. Deterministic scalar arithmetic, so a JIT run and a native run agree.
/// Stateless apart from the catalogue, hence safe to call from several threads.
/// </summary>
internal sealed class ShelfAwareScorer(GearCatalogue catalogue) : PairwiseScorer<GearRequest>
{
    public override void WriteRetrievalVector(GearRequest query, Span<float> destination) => query.Vector.CopyTo(destination);

    public override int Score(GearRequest query, ReadOnlySpan<long> candidateIds, Span<float> scores)
    {
        for (int i = 0; i < candidateIds.Length; i++)
        {
            ReadOnlySpan<float> item = catalogue.VectorOf(candidateIds[i]);
            float squared = 0;
            for (int j = 0; j < item.Length; j++)
            {
                float difference = query.Vector[j] - item[j];
                squared += difference * difference;
            }

            bool booked = !catalogue.Items[(int)candidateIds[i]].InStock;
            scores[i] = -squared - (query.OnShelfOnly && booked ? 10f : 0f);
        }

        return candidateIds.Length;
    }
}

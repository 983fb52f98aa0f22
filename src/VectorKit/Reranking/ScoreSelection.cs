namespace VectorKit.Reranking;

/// <summary>
/// Keeps the best few (score, id, position) entries seen so far, best first: higher score, then lower id. Insertion
/// into a short sorted array: the final count k is small, and most candidates are rejected by one comparison with
/// the current last entry.
/// </summary>
internal ref struct ScoreSelection
{
    private readonly Span<float> _scores;
    private readonly Span<long> _ids;
    private readonly Span<int> _positions;

    public ScoreSelection(Span<float> scores, Span<long> ids, Span<int> positions)
    {
        _scores = scores;
        _ids = ids;
        _positions = positions;
        Count = 0;
    }

    public int Count { get; private set; }

    public readonly ReadOnlySpan<int> Positions => _positions[..Count];

    public readonly ReadOnlySpan<long> Ids => _ids[..Count];

    public readonly ReadOnlySpan<float> Scores => _scores[..Count];

    public void Offer(float score, long id, int position)
    {
        int capacity = _scores.Length;
        int i = Count;
        if (i == capacity)
        {
            if (!RerankedHit.RanksBefore(score, id, _scores[i - 1], _ids[i - 1]))
            {
                return;
            }

            i--;
        }
        else
        {
            Count++;
        }

        // Shift worse entries one place down until the new entry's place is found.
        while (i > 0 && RerankedHit.RanksBefore(score, id, _scores[i - 1], _ids[i - 1]))
        {
            _scores[i] = _scores[i - 1];
            _ids[i] = _ids[i - 1];
            _positions[i] = _positions[i - 1];
            i--;
        }

        _scores[i] = score;
        _ids[i] = id;
        _positions[i] = position;
    }
}

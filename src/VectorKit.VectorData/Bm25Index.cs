namespace VectorKit.VectorData;

/// <summary>
/// A BM25 keyword index over one full-text data property (Robertson and Zaragoza, "The probabilistic relevance
/// framework: BM25 and beyond", 2009). Not thread-safe: the collection's lock guards it.
/// </summary>
/// <remarks>
/// score(d, q) = Σ over distinct query terms t of idf(t) · tf(t, d) · (k1 + 1) / (tf(t, d) + k1 · (1 − b + b · |d| / avgdl)),
/// with idf(t) = ln(1 + (N − n(t) + 0.5) / (n(t) + 0.5)): the Robertson–Spärck Jones weight shifted by one inside the
/// logarithm so that a term in more than half of the documents still counts positively. Terms are maximal runs of
/// letters and digits, joined across single inner hyphens or dots (so "KX-2291" and "2.5" are one term each), lower-cased
/// invariantly.
/// </remarks>
internal sealed class Bm25Index
{
    private readonly Dictionary<string, Dictionary<long, int>> _postings = new(StringComparer.Ordinal);
    private readonly Dictionary<long, int> _lengths = [];

    // Each document's distinct terms, so that removing it touches only its own postings.
    private readonly Dictionary<long, string[]> _terms = [];
    private long _totalLength;

    public int DocumentCount => _lengths.Count;

    public void Set(long id, string? text)
    {
        Remove(id);
        if (text is null)
        {
            return;
        }

        List<string> terms = Tokenize(text);
        _lengths[id] = terms.Count;
        _terms[id] = [.. new HashSet<string>(terms, StringComparer.Ordinal)];
        _totalLength += terms.Count;
        foreach (string term in terms)
        {
            if (!_postings.TryGetValue(term, out Dictionary<long, int>? posting))
            {
                posting = [];
                _postings[term] = posting;
            }

            posting[id] = posting.GetValueOrDefault(id) + 1;
        }
    }

    public void Remove(long id)
    {
        if (!_lengths.Remove(id, out int length))
        {
            return;
        }

        _totalLength -= length;
        _terms.Remove(id, out string[]? terms);
        foreach (string term in terms!)
        {
            Dictionary<long, int> posting = _postings[term];
            posting.Remove(id);
            if (posting.Count == 0)
            {
                _postings.Remove(term);
            }
        }
    }

    /// <summary>Documents with a positive score that pass the filter, best first, ties by ascending id.</summary>
    public List<(long Id, double Score)> Search(IEnumerable<string> keywords, double k1, double b, Func<long, bool>? filter, int limit, CancellationToken cancellationToken)
    {
        var terms = new HashSet<string>(StringComparer.Ordinal);
        foreach (string keyword in keywords)
        {
            ArgumentNullException.ThrowIfNull(keyword, nameof(keywords));
            terms.UnionWith(Tokenize(keyword));
        }

        var scores = new Dictionary<long, double>();
        int n = _lengths.Count;
        double averageLength = n == 0 ? 0 : (double)_totalLength / n;

        // Terms in ordinal order: a string set's order changes between processes, and so would the last bits of each sum.
        string[] ordered = [.. terms];
        Array.Sort(ordered, StringComparer.Ordinal);
        foreach (string term in ordered)
        {
            cancellationToken.ThrowIfCancellationRequested();
            if (!_postings.TryGetValue(term, out Dictionary<long, int>? posting))
            {
                continue;
            }

            double idf = Math.Log(1 + ((n - posting.Count + 0.5) / (posting.Count + 0.5)));
            foreach ((long id, int tf) in posting)
            {
                double norm = averageLength == 0 ? 1 : 1 - b + (b * _lengths[id] / averageLength);
                scores[id] = scores.GetValueOrDefault(id) + (idf * tf * (k1 + 1) / (tf + (k1 * norm)));
            }
        }

        var result = new List<(long Id, double Score)>(scores.Count);
        foreach ((long id, double score) in scores)
        {
            if (score > 0 && (filter is null || filter(id)))
            {
                result.Add((id, score));
            }
        }

        result.Sort(static (x, y) => x.Score != y.Score ? y.Score.CompareTo(x.Score) : x.Id.CompareTo(y.Id));
        if (result.Count > limit)
        {
            result.RemoveRange(limit, result.Count - limit);
        }

        return result;
    }

    /// <summary>The terms of a text, in order, repeats kept.</summary>
    public static List<string> Tokenize(string text)
    {
        var terms = new List<string>();
        int i = 0;
        while (i < text.Length)
        {
            if (!char.IsLetterOrDigit(text[i]))
            {
                i++;
                continue;
            }

            int start = i;
            while (i < text.Length
                   && (char.IsLetterOrDigit(text[i])
                       || ((text[i] is '-' or '.') && i + 1 < text.Length && char.IsLetterOrDigit(text[i + 1]) && i > start)))
            {
                i++;
            }

            terms.Add(text[start..i].ToLowerInvariant());
        }

        return terms;
    }
}

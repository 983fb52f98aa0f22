using Microsoft.Extensions.VectorData;

namespace VectorKit.VectorData.Tests;

/// <summary>
/// BM25 and reciprocal rank fusion against straightforward implementations written here from the formulas
/// (Robertson and Zaragoza 2009; Cormack, Clarke and Büttcher 2009). No published worked example is checked: none
/// with printed scores for this idf variant could be cited, so the reference is the formula alone.
/// </summary>
public class HybridSearchTests
{
    // Lower-case words separated by single spaces: the connector's term splitting and a plain Split agree on these.
    private static readonly string[] Corpus =
    [
        "tent pole repair kit for dome tent",
        "two person tent with rain fly",
        "camp stove with wind screen",
        "stove fuel canister",
        "dome tent footprint",
        "kayak paddle with drip rings",
        "tent tent tent stakes",
        "rain jacket",
        "sleeping bag for winter camp",
        "stove",
    ];

    [Theory]
    [InlineData("tent")]
    [InlineData("stove camp")]
    [InlineData("rain tent")]
    [InlineData("winter")]
    [InlineData("nothing matches")]
    public void Bm25_scores_equal_the_formula(string query)
    {
        var index = new Bm25Index();
        for (int i = 0; i < Corpus.Length; i++)
        {
            index.Set(i, Corpus[i]);
        }

        var actual = index.Search([query], 1.2, 0.75, null, int.MaxValue, CancellationToken.None);
        var expected = NaiveBm25(Corpus, query.Split(' '), 1.2, 0.75)
            .Select((score, id) => (Id: (long)id, Score: score))
            .Where(x => x.Score > 0)
            .OrderByDescending(x => x.Score).ThenBy(x => x.Id)
            .ToList();
        Assert.Equal(expected.Select(x => x.Id), actual.Select(x => x.Id));
        for (int i = 0; i < expected.Count; i++)
        {
            Assert.Equal(expected[i].Score, actual[i].Score, 12);
        }
    }

    [Fact]
    public void Bm25_forgets_removed_and_replaced_documents()
    {
        var index = new Bm25Index();
        for (int i = 0; i < Corpus.Length; i++)
        {
            index.Set(i, Corpus[i]);
        }

        index.Set(3, "kayak spray skirt");
        index.Remove(9);
        string[] changed = [.. Corpus];
        changed[3] = "kayak spray skirt";
        var survivors = changed.Where((_, i) => i != 9).ToArray();
        var expected = NaiveBm25(survivors, ["stove", "kayak"], 1.2, 0.75);
        var actual = index.Search(["stove kayak"], 1.2, 0.75, null, int.MaxValue, CancellationToken.None).ToDictionary(x => x.Id, x => x.Score);
        for (int i = 0; i < survivors.Length; i++)
        {
            long id = i < 9 ? i : i + 1;
            Assert.Equal(expected[i], actual.GetValueOrDefault(id), 12);
        }
    }

    [Fact]
    public void Terms_keep_part_numbers_and_decimals_whole()
    {
        Assert.Equal(["pack", "kx-2291", "holds", "2.5", "l"], Bm25Index.Tokenize("Pack KX-2291 holds 2.5 L."));
        Assert.Equal(["a", "b"], Bm25Index.Tokenize("-a- --b"));
    }

    [Fact]
    public async Task Hybrid_search_is_reciprocal_rank_fusion_of_the_vector_and_keyword_rankings()
    {
        var generator = new HashEmbeddingGenerator(8);
        var options = new VectorKitStoreOptions { FusionDepth = 6, FusionRankConstant = 60 };
        using var store = new VectorKitStore(options);
        var notes = store.GetCollection<string, NoteRecord>("notes", new VectorKitCollectionOptions { EmbeddingGenerator = generator });
        await notes.EnsureCollectionExistsAsync();
        await notes.UpsertAsync(Corpus.Select((text, i) => new NoteRecord { Key = $"k{i}", Text = text, TextEmbedding = text }));

        string query = "dome tent with stakes";
        string[] keywords = ["tent", "stakes"];

        // Vector ranking: brute force in double precision over the same stand-in embeddings (cosine similarity).
        float[] q = HashEmbeddingGenerator.Embed(query, 8);
        var vectorRank = Corpus.Select((text, i) => (Id: i, Sim: Cosine(HashEmbeddingGenerator.Embed(text, 8), q)))
            .OrderByDescending(x => x.Sim).ThenBy(x => x.Id).Take(6).Select(x => x.Id).ToList();
        var keywordRank = NaiveBm25(Corpus, ["tent", "stakes"], 1.2, 0.75).Select((s, i) => (Id: i, Score: s))
            .Where(x => x.Score > 0).OrderByDescending(x => x.Score).ThenBy(x => x.Id).Take(6).Select(x => x.Id).ToList();
        var fused = vectorRank.Concat(keywordRank).Distinct()
            .Select(id => (Id: id, Score: RrfTerm(vectorRank, id) + RrfTerm(keywordRank, id), V: Rank(vectorRank, id), K: Rank(keywordRank, id)))
            .OrderByDescending(x => x.Score).ThenBy(x => x.V).ThenBy(x => x.K).ToList();

        var results = await notes.HybridSearchAsync(query, keywords, 5).ToListAsync();
        Assert.Equal(fused.Take(5).Select(x => $"k{x.Id}"), results.Select(r => r.Record.Key));
        Assert.Equal(fused[0].Score, results[0].Score!.Value, 12);

        // Skip, threshold and a filter that runs inside both lists.
        var skipped = await notes.HybridSearchAsync(query, keywords, 2, new HybridSearchOptions<NoteRecord> { Skip = 1 }).ToListAsync();
        Assert.Equal(fused.Skip(1).Take(2).Select(x => $"k{x.Id}"), skipped.Select(r => r.Record.Key));
        var filtered = await notes.HybridSearchAsync(query, keywords, 10, new HybridSearchOptions<NoteRecord> { Filter = r => r.Key != "k6" }).ToListAsync();
        Assert.DoesNotContain(filtered, r => r.Record.Key == "k6");
        double threshold = fused[1].Score;
        var above = await notes.HybridSearchAsync(query, keywords, 10, new HybridSearchOptions<NoteRecord> { ScoreThreshold = threshold }).ToListAsync();
        Assert.All(above, r => Assert.True(r.Score >= threshold));

        IKeywordHybridSearchable<NoteRecord> searchable = notes; // reachable through the abstraction's interface
        Assert.NotEmpty(await searchable.HybridSearchAsync(query, keywords, 1).ToListAsync());
    }

    private static double RrfTerm(List<int> ranking, int id) => ranking.IndexOf(id) is int r and >= 0 ? 1.0 / (60 + r + 1) : 0;

    private static int Rank(List<int> ranking, int id) => ranking.IndexOf(id) is int r and >= 0 ? r : int.MaxValue;

    private static double Cosine(float[] a, float[] b)
    {
        double dot = 0, na = 0, nb = 0;
        for (int i = 0; i < a.Length; i++)
        {
            dot += (double)a[i] * b[i];
            na += (double)a[i] * a[i];
            nb += (double)b[i] * b[i];
        }

        return dot / Math.Sqrt(na * nb);
    }

    /// <summary>BM25 exactly as written: Σ idf · tf · (k1 + 1) / (tf + k1 · (1 − b + b · |d| / avgdl)), idf = ln(1 + (N − n + 0.5) / (n + 0.5)).</summary>
    private static double[] NaiveBm25(string[] documents, string[] queryTerms, double k1, double b)
    {
        string[][] words = documents.Select(d => d.Split(' ')).ToArray();
        double averageLength = words.Average(w => w.Length);
        var scores = new double[documents.Length];
        foreach (string term in queryTerms.Distinct())
        {
            int n = words.Count(w => w.Contains(term));
            double idf = Math.Log(1 + ((documents.Length - n + 0.5) / (n + 0.5)));
            for (int d = 0; d < documents.Length; d++)
            {
                int tf = words[d].Count(w => w == term);
                scores[d] += idf * tf * (k1 + 1) / (tf + (k1 * (1 - b + (b * words[d].Length / averageLength))));
            }
        }

        return scores;
    }
}

using System.Diagnostics;
using System.Globalization;
using Microsoft.Extensions.AI;
using Microsoft.Extensions.VectorData;
using RentalSearch;
using VectorKit.VectorData;

// Semantic and hybrid search over the invented Larchpass Outdoor Co-op's rental catalogue, written against the
// platform's vector-store abstraction; VectorKit is the provider (the one line that names it is marked below).
CultureInfo.CurrentCulture = CultureInfo.InvariantCulture;
string directory = Path.Combine(Path.GetTempPath(), "rental-search-" + Guid.NewGuid().ToString("N"));
try
{
    await Run(directory);
}
finally
{
    if (Directory.Exists(directory))
    {
        Directory.Delete(directory, recursive: true);
    }
}

static async Task Run(string directory)
{
    using var generator = new MiniLmEmbeddingGenerator();
    List<Catalogue.Entry> entries = Catalogue.Generate();
    var clock = Stopwatch.StartNew();

    // The provider: the only VectorKit-specific line. Everything below uses the abstraction's types.
    VectorStore store = new VectorKitStore(new VectorKitStoreOptions { Directory = directory, EmbeddingGenerator = generator });

    VectorStoreCollection<int, RentalItem> catalogue = store.GetCollection<int, RentalItem>("catalogue");
    await catalogue.EnsureCollectionExistsAsync();
    for (int start = 0; start < entries.Count; start += 512)
    {
        await catalogue.UpsertAsync(entries.Skip(start).Take(512).Select(e => e.Item));
    }

    Console.WriteLine($"Larchpass Outdoor Co-op rental search (invented data): {entries.Count:N0} items embedded with all-MiniLM-L6-v2 and stored in {clock.Elapsed.TotalSeconds:F0} s");
    Console.WriteLine();

    foreach (string query in new[] { "something warm to sleep in when camping on snow", "a light I can wear on my head", "boat for one person" })
    {
        Console.WriteLine($"Semantic search \"{query}\", top 5 (cosine similarity):");
        await Print(catalogue.SearchAsync(query, 5));
    }

    Console.WriteLine("Semantic search \"shelter for a family trip in the mountains\", only in stock, under 20.00 a day, tagged winter, top 5:");
    await Print(catalogue.SearchAsync("shelter for a family trip in the mountains", 5, new VectorSearchOptions<RentalItem>
    {
        Filter = r => r.InStock && r.DailyRate < 20 && r.Tags.Contains("winter"),
    }));

    var hybrid = (IKeywordHybridSearchable<RentalItem>)catalogue;
    string code = entries[1234].Item.ModelCode;
    string codeQuery = $"{code} {entries[1234].Noun}";
    Console.WriteLine($"Semantic search \"{codeQuery}\" (a model code), top 3:");
    await Print(catalogue.SearchAsync(codeQuery, 3));
    Console.WriteLine($"Hybrid search \"{codeQuery}\" (BM25 on the description fused with the vector results), top 3 (fused score):");
    await Print(hybrid.HybridSearchAsync(codeQuery, codeQuery.Split(' '), 3));

    // Measured checks.
    await DeskNoteParaphrases(store, generator);
    await CatalogueParaphrases(catalogue, generator, entries);
    await ModelCodes(catalogue, hybrid, generator, entries);

    // Persistence: save, open the directory with a new store, compare answers.
    clock.Restart();
    await ((VectorKitStore)store).SaveAsync();
    long bytes = new FileInfo(Path.Combine(directory, "catalogue" + VectorKitStore.FileExtension)).Length;
    string[] probes = ["a light I can wear on my head", "oversized navy rucksack", codeQuery];
    var before = new List<string>();
    foreach (string probe in probes)
    {
        before.Add(string.Join(',', await catalogue.SearchAsync(probe, 10).Select(r => r.Record.Id).ToListAsync()));
    }

    store.Dispose();
    using VectorStore reopened = new VectorKitStore(new VectorKitStoreOptions { Directory = directory, EmbeddingGenerator = generator });
    var loaded = reopened.GetCollection<int, RentalItem>("catalogue");
    bool same = true;
    for (int i = 0; i < probes.Length; i++)
    {
        same &= before[i] == string.Join(',', await loaded.SearchAsync(probes[i], 10).Select(r => r.Record.Id).ToListAsync());
    }

    Console.WriteLine($"Saved and reopened the store directory ({bytes / 1e6:F1} MB, {clock.Elapsed.TotalSeconds:F1} s): {await loaded.GetAsync(r => true, int.MaxValue).CountAsync():N0} items; same answers for {probes.Length} queries: {(same ? "yes" : "no")}");
}

static async Task Print(IAsyncEnumerable<VectorSearchResult<RentalItem>> results)
{
    await foreach (VectorSearchResult<RentalItem> result in results)
    {
        RentalItem item = result.Record;
        Console.WriteLine($"  {result.Score,7:F4}  #{item.Id,-5} {item.DailyRate,6:F2}/day  {(item.InStock ? "in stock " : "rented out")}  {item.Description}");
    }

    Console.WriteLine();
}

static async Task DeskNoteParaphrases(VectorStore store, MiniLmEmbeddingGenerator generator)
{
    var notes = store.GetCollection<int, DeskNote>("desk-notes");
    await notes.EnsureCollectionExistsAsync();
    await notes.UpsertAsync(DeskNotes.Pairs.Select((p, i) => new DeskNote { Id = i, Text = p.Note, Embedding = p.Note }));
    int first = 0;
    for (int i = 0; i < DeskNotes.Pairs.Length; i++)
    {
        first += await notes.SearchAsync(DeskNotes.Pairs[i].Paraphrase, 1).AnyAsync(r => r.Record.Id == i) ? 1 : 0;
    }

    Console.WriteLine($"Desk-note paraphrases: the paraphrased note ranked first for {first} of {DeskNotes.Pairs.Length} ({100.0 * first / DeskNotes.Pairs.Length:F1} %)");
}

static async Task CatalogueParaphrases(VectorStoreCollection<int, RentalItem> catalogue, MiniLmEmbeddingGenerator generator, List<Catalogue.Entry> entries)
{
    // Items differ from their neighbours by one attribute (colour, condition, ...), so the exact item is rarely first;
    // what a reader can judge is whether the reworded category and season are understood.
    List<Catalogue.Entry> sample = [.. entries.Where((_, i) => i % 23 == 5)];
    var queries = await generator.GenerateAsync(sample.Select(e => e.Paraphrase));
    int category = 0, categoryAndSeason = 0, exact = 0;
    for (int i = 0; i < sample.Count; i++)
    {
        RentalItem best = (await catalogue.SearchAsync(queries[i].Vector, 1).SingleAsync()).Record;
        RentalItem target = sample[i].Item;
        category += best.Category == target.Category ? 1 : 0;
        categoryAndSeason += best.Category == target.Category && best.Tags[0] == target.Tags[0] ? 1 : 0;
        exact += best.Id == target.Id ? 1 : 0;
    }

    Console.WriteLine($"Catalogue paraphrases ({sample.Count} items, every attribute reworded): first result of the right category for {category} ({100.0 * category / sample.Count:F1} %), "
        + $"right category and season for {categoryAndSeason} ({100.0 * categoryAndSeason / sample.Count:F1} %), the item itself for {exact} ({100.0 * exact / sample.Count:F1} %)");
}

static async Task ModelCodes(VectorStoreCollection<int, RentalItem> catalogue, IKeywordHybridSearchable<RentalItem> hybrid, MiniLmEmbeddingGenerator generator, List<Catalogue.Entry> entries)
{
    List<Catalogue.Entry> sample = [.. entries.Where((_, i) => i % 17 == 3)];
    string[] texts = [.. sample.Select(e => $"{e.Item.ModelCode} {e.Noun}")];
    var queries = await generator.GenerateAsync(texts);
    int vectorFirst = 0, hybridFirst = 0, codeFirst = 0;
    double vectorReciprocal = 0, hybridReciprocal = 0, codeReciprocal = 0;
    for (int i = 0; i < sample.Count; i++)
    {
        int target = sample[i].Item.Id;
        var byVector = await catalogue.SearchAsync(queries[i].Vector, 10).Select(r => r.Record.Id).ToListAsync();
        var byBoth = await hybrid.HybridSearchAsync(queries[i].Vector, texts[i].Split(' '), 10).Select(r => r.Record.Id).ToListAsync();
        var byCode = await hybrid.HybridSearchAsync(queries[i].Vector, [sample[i].Item.ModelCode], 10).Select(r => r.Record.Id).ToListAsync();
        codeFirst += byCode[0] == target ? 1 : 0;
        codeReciprocal += byCode.IndexOf(target) is int c and >= 0 ? 1.0 / (c + 1) : 0;
        vectorFirst += byVector[0] == target ? 1 : 0;
        hybridFirst += byBoth[0] == target ? 1 : 0;
        vectorReciprocal += byVector.IndexOf(target) is int v and >= 0 ? 1.0 / (v + 1) : 0;
        hybridReciprocal += byBoth.IndexOf(target) is int h and >= 0 ? 1.0 / (h + 1) : 0;
    }

    Console.WriteLine($"Model-code queries (\"<code> <category>\", {sample.Count} items), first result is the item:");
    Console.WriteLine($"  vector search                       {vectorFirst,4} ({100.0 * vectorFirst / sample.Count,5:F1} %), MRR@10 {vectorReciprocal / sample.Count:F3}");
    Console.WriteLine($"  hybrid, every query word a keyword  {hybridFirst,4} ({100.0 * hybridFirst / sample.Count,5:F1} %), MRR@10 {hybridReciprocal / sample.Count:F3}");
    Console.WriteLine($"  hybrid, the code as the keyword     {codeFirst,4} ({100.0 * codeFirst / sample.Count,5:F1} %), MRR@10 {codeReciprocal / sample.Count:F3}");
}

/// <summary>A rental-desk note, embedded from its text.</summary>
public sealed class DeskNote
{
    [VectorStoreKey]
    public int Id { get; set; }

    [VectorStoreData]
    public string Text { get; set; } = "";

    [VectorStoreVector(MiniLmEmbeddingGenerator.Dimension)]
    public string? Embedding { get; set; }
}

namespace RentalSearch;

/// <summary>
/// The invented Larchpass Outdoor Co-op's rental catalogue, generated from templates: every combination of category,
/// size, weight class, season, colour and condition once (3,456 items), each with a unique model code. Each attribute
/// also has a paraphrase, used to write queries that share few words with the description.
/// </summary>
public static class Catalogue
{
    // (noun, paraphrase, model-code prefix, base daily rate)
    private static readonly (string Noun, string Paraphrase, string Prefix, double Rate)[] Categories =
    [
        ("tent", "shelter to sleep under", "TN", 18),
        ("sleeping bag", "quilt-like bedroll", "SB", 9),
        ("backpack", "rucksack for carrying gear", "BP", 8),
        ("camp stove", "portable cooker", "CS", 6),
        ("kayak", "one-seat paddling boat", "KY", 35),
        ("canoe paddle", "oar for an open canoe", "CP", 4),
        ("headlamp", "light worn on the forehead", "HL", 3),
        ("trekking poles", "walking sticks for hiking", "TP", 4),
        ("snowshoes", "footwear for walking on deep snow", "SS", 10),
        ("climbing harness", "belt and leg loops for roped climbing", "CH", 7),
        ("water filter", "device that makes stream water drinkable", "WF", 5),
        ("camp chair", "folding seat for the campsite", "CC", 3),
    ];

    private static readonly (string Word, string Paraphrase, double Factor)[] Sizes =
    [
        ("compact", "small and packable", 0.8), ("regular", "medium-sized", 1.0), ("large", "roomy", 1.2), ("extra-large", "oversized", 1.4),
    ];

    private static readonly (string Word, string Paraphrase, double Factor)[] Weights =
    [
        ("ultralight", "weighs almost nothing", 1.5), ("standard-weight", "of ordinary heft", 1.0), ("heavy-duty", "built to survive rough use", 1.2),
    ];

    private static readonly (string Word, string Paraphrase, string Tag)[] Seasons =
    [
        ("summer", "hot weather", "summer"), ("three-season", "spring through autumn", "three-season"), ("winter", "snow and freezing nights", "winter"),
    ];

    private static readonly (string Word, string Paraphrase)[] Colours = [("red", "crimson"), ("green", "forest-toned"), ("blue", "navy"), ("orange", "tangerine")];

    private static readonly (string Words, string Paraphrase, double Factor)[] Conditions =
    [
        ("brand new", "never rented before", 1.0), ("lightly used", "gently worn from earlier rentals", 0.75),
    ];

    /// <summary>One generated item with the paraphrase of its attributes.</summary>
    public sealed record Entry(RentalItem Item, string Paraphrase, string Noun);

    public static List<Entry> Generate()
    {
        var random = new Random(20261203);
        var codes = new HashSet<string>(StringComparer.Ordinal);
        var entries = new List<Entry>();
        foreach (var category in Categories)
        {
            foreach (var size in Sizes)
            {
                foreach (var weight in Weights)
                {
                    foreach (var season in Seasons)
                    {
                        foreach (var colour in Colours)
                        {
                            foreach (var condition in Conditions)
                            {
                                string code;
                                do
                                {
                                    code = $"{category.Prefix}-{random.Next(1000, 10000)}";
                                }
                                while (!codes.Add(code));

                                int id = entries.Count;
                                string description = $"{Capitalise(size.Word)} {weight.Word} {season.Word} {category.Noun} in {colour.Word}, {condition.Words}. Model {code}.";
                                string paraphrase = (id % 3) switch
                                {
                                    0 => $"a {colour.Paraphrase} {category.Paraphrase}, {size.Paraphrase}, that {Verb(weight.Paraphrase)}, meant for {season.Paraphrase}, {condition.Paraphrase}",
                                    1 => $"{condition.Paraphrase}: {category.Paraphrase} for {season.Paraphrase}, {size.Paraphrase} and {colour.Paraphrase}, {weight.Paraphrase}",
                                    _ => $"looking for a {size.Paraphrase} {category.Paraphrase} in {colour.Paraphrase} for {season.Paraphrase}; it {Verb(weight.Paraphrase)}; {condition.Paraphrase}",
                                };
                                entries.Add(new Entry(
                                    new RentalItem
                                    {
                                        Id = id,
                                        Category = category.Noun,
                                        ModelCode = code,
                                        DailyRate = Math.Round(category.Rate * size.Factor * weight.Factor * condition.Factor, 2),
                                        InStock = id % 5 != 0,
                                        Tags = [season.Tag, weight.Word, colour.Word],
                                        Description = description,
                                        Embedding = description,
                                    },
                                    paraphrase,
                                    category.Noun));
                            }
                        }
                    }
                }
            }
        }

        return entries;
    }

    private static string Verb(string phrase) => phrase.StartsWith("of ", StringComparison.Ordinal) ? "is " + phrase
        : phrase.StartsWith("built", StringComparison.Ordinal) ? "is " + phrase
        : phrase;

    private static string Capitalise(string word) => char.ToUpperInvariant(word[0]) + word[1..];
}

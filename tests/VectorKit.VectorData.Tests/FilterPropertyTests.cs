using System.Linq.Expressions;
using System.Reflection;
using FsCheck.Xunit;
using Microsoft.Extensions.VectorData;

namespace VectorKit.VectorData.Tests;

/// <summary>
/// Filtered search on an exact index against the reference: LINQ to objects (<c>Where</c> with the same expression,
/// compiled by .NET) and a brute-force distance ordering in double precision.
/// </summary>
public class FilterPropertyTests
{
    private static readonly string[] Categories = ["Tent", "Stove", "Pack", "Kayak"];
    private static readonly string[] TagValues = ["winter", "ultralight", "family", "repair"];
    private static readonly ParameterExpression R = Expression.Parameter(typeof(GearItem), "r");
    private static readonly MethodInfo EnumerableContains =
        typeof(Enumerable).GetMethods().Single(m => m.Name == "Contains" && m.GetParameters().Length == 2).MakeGenericMethod(typeof(string));

    [Property(MaxTest = 60)]
    public void Filtered_search_on_an_exact_index_equals_where_plus_brute_force(int seed)
    {
        var random = new Random(seed);
        List<GearItem> items = RandomItems(random, random.Next(0, 60));
        Expression<Func<GearItem, bool>> filter = Expression.Lambda<Func<GearItem, bool>>(RandomPredicate(random, 3), R);
        float[] query = RandomVector(random);
        int top = random.Next(1, 20);
        int skip = random.Next(0, 5);

        using var store = new VectorKitStore();
        var collection = store.GetCollection<int, GearItem>("gear");
        collection.EnsureCollectionExistsAsync().GetAwaiter().GetResult();
        collection.UpsertAsync(items).GetAwaiter().GetResult();

        var expected = items.Where(filter.Compile())
            .Select((item, order) => (item, order, distance: SquaredDistance(item.Embedding!.Value.Span, query)))
            .OrderBy(x => x.distance).ThenBy(x => x.order)
            .Skip(skip).Take(top)
            .Select(x => (x.item.Id, x.distance))
            .ToList();

        var actual = collection.SearchAsync(query, top, new VectorSearchOptions<GearItem> { Filter = filter, Skip = skip })
            .ToBlockingList()
            .Select(r => (r.Record.Id, r.Score!.Value))
            .ToList();

        Assert.True(expected.Count == actual.Count, $"seed {seed}, filter {filter}: expected {expected.Count} results, got {actual.Count}");
        for (int i = 0; i < expected.Count; i++)
        {
            Assert.True(expected[i].Id == actual[i].Id, $"seed {seed}, filter {filter}: rank {i} expected #{expected[i].Id}, got #{actual[i].Id}");
            Assert.Equal(expected[i].distance, actual[i].Item2, 4);
        }

        // Filtered retrieval without a vector: the same set, in insertion order.
        var all = collection.GetAsync(filter, int.MaxValue).ToBlockingList().Select(r => r.Id).ToList();
        Assert.Equal(items.Where(filter.Compile()).Select(i => i.Id).ToList(), all);
    }

    [Fact]
    public async Task Filters_written_as_csharp_lambdas_translate_like_linq_to_objects()
    {
        var random = new Random(7);
        List<GearItem> items = RandomItems(random, 80);
        using var store = new VectorKitStore();
        var collection = store.GetCollection<int, GearItem>("gear");
        await collection.EnsureCollectionExistsAsync();
        await collection.UpsertAsync(items);

        string wanted = "Tent";
        string[] some = ["Stove", "Pack"];
        var lists = new List<string> { "Kayak" };
        Expression<Func<GearItem, bool>>[] filters =
        [
            r => r.Category == wanted,
            r => r.Category != "Tent" && r.Count >= 3,
            r => r.Price < 12.5 || !r.InStock,
            r => r.InStock,
            r => !r.InStock,
            r => r.Weight > 1.1, // float compared as double, as LINQ to objects does
            r => r.Rating == null,
            r => r.Rating > 2,
            r => r.Tags.Contains("winter"),
            r => r.Seasons.Contains("summer"),
            r => some.Contains(r.Category),
            r => lists.Contains(r.Category),
            r => r.Id > 40 && r.Id <= 60,
            r => true,
        ];

        foreach (var filter in filters)
        {
            var expected = items.Where(filter.Compile()).Select(i => i.Id).ToList();
            var actual = await collection.GetAsync(filter, 1000).Select(r => r.Id).ToListAsync();
            Assert.True(expected.SequenceEqual(actual), $"filter {filter}: expected [{string.Join(',', expected)}], got [{string.Join(',', actual)}]");
        }
    }

    internal static List<GearItem> RandomItems(Random random, int count)
    {
        var items = new List<GearItem>(count);
        for (int i = 0; i < count; i++)
        {
            items.Add(new GearItem
            {
                Id = i * 3 + 1,
                Category = Categories[random.Next(Categories.Length)],
                Count = random.Next(0, 6),
                Price = random.Next(0, 40) * 0.5,
                Weight = random.Next(0, 30) * 0.1f,
                InStock = random.Next(2) == 0,
                Rating = random.Next(4) == 0 ? null : random.Next(1, 6),
                Tags = TagValues.Where(_ => random.Next(3) == 0).ToArray(),
                Seasons = new[] { "summer", "winter" }.Where(_ => random.Next(2) == 0).ToList(),
                Description = $"{Categories[random.Next(Categories.Length)]} item {i}",
                Embedding = RandomVector(random),
            });
        }

        return items;
    }

    // Small integer coordinates: every distance is exact in float, so the order (ties by insertion) is well defined.
    private static float[] RandomVector(Random random) => [random.Next(-3, 4), random.Next(-3, 4), random.Next(-3, 4), random.Next(-3, 4)];

    private static double SquaredDistance(ReadOnlySpan<float> a, float[] b)
    {
        double sum = 0;
        for (int i = 0; i < b.Length; i++)
        {
            double d = (double)a[i] - b[i];
            sum += d * d;
        }

        return sum;
    }

    private static Expression RandomPredicate(Random random, int depth)
    {
        int choice = random.Next(depth > 0 ? 12 : 9);
        switch (choice)
        {
            case 0: return Compare(random, Expression.Property(R, nameof(GearItem.Count)), Expression.Constant(random.Next(-1, 7)));
            case 1:
                // A float compared with a double constant: C# converts the property.
                return Compare(random, Expression.Convert(Expression.Property(R, nameof(GearItem.Weight)), typeof(double)), Expression.Constant(random.Next(0, 30) * 0.1));
            case 2: return Compare(random, Expression.Property(R, nameof(GearItem.Price)), Expression.Constant(random.Next(0, 40) * 0.5));
            case 3:
                return Compare(random, Expression.Property(R, nameof(GearItem.Rating)),
                    random.Next(5) == 0 ? Expression.Constant(null, typeof(int?)) : Expression.Convert(Expression.Constant(random.Next(0, 7)), typeof(int?)));
            case 4:
                Expression category = Expression.Constant(Categories[random.Next(Categories.Length)]);
                return random.Next(2) == 0 ? Expression.Equal(Expression.Property(R, nameof(GearItem.Category)), category) : Expression.NotEqual(Expression.Property(R, nameof(GearItem.Category)), category);
            case 5: return Expression.Property(R, nameof(GearItem.InStock));
            case 6: return Expression.Call(EnumerableContains, Expression.Property(R, nameof(GearItem.Tags)), Expression.Constant(TagValues[random.Next(TagValues.Length)]));
            case 7:
                string[] set = Categories.Where(_ => random.Next(2) == 0).ToArray();
                return Expression.Call(EnumerableContains, Expression.Constant(set), Expression.Property(R, nameof(GearItem.Category)));
            case 8: return Compare(random, Expression.Property(R, nameof(GearItem.Id)), Expression.Constant(random.Next(0, 200)));
            case 9: return Expression.AndAlso(RandomPredicate(random, depth - 1), RandomPredicate(random, depth - 1));
            case 10: return Expression.OrElse(RandomPredicate(random, depth - 1), RandomPredicate(random, depth - 1));
            default: return Expression.Not(RandomPredicate(random, depth - 1));
        }
    }

    private static Expression Compare(Random random, Expression left, Expression right) => random.Next(6) switch
    {
        0 => Expression.Equal(left, right),
        1 => Expression.NotEqual(left, right),
        2 => Expression.LessThan(left, right),
        3 => Expression.LessThanOrEqual(left, right),
        4 => Expression.GreaterThan(left, right),
        _ => Expression.GreaterThanOrEqual(left, right),
    };
}

internal static class AsyncEnumerableTestExtensions
{
    public static List<T> ToBlockingList<T>(this IAsyncEnumerable<T> source) => source.ToListAsync().AsTask().GetAwaiter().GetResult();
}

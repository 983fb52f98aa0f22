using System.Collections.Concurrent;
using System.Diagnostics;
using System.Net.Http.Json;

namespace ShardedSearch;

/// <summary>What a load test measured.</summary>
public sealed record LoadReport(
    int Clients,
    double Seconds,
    int Reads,
    int Writes,
    int Errors,
    double[] ReadMilliseconds,
    double[] WriteMilliseconds,
    int AcknowledgedItems,
    int LostItems)
{
    public double RequestsPerSecond => (Reads + Writes) / Seconds;

    public static double Percentile(double[] sorted, double p) => sorted.Length == 0 ? 0 : sorted[Math.Min(sorted.Length - 1, (int)Math.Ceiling(p * sorted.Length) - 1)];

    public override string ToString()
    {
        string Line(string what, double[] ms) => $"{what} {ms.Length}: p50 {Percentile(ms, 0.50):F1} ms, p99 {Percentile(ms, 0.99):F1} ms, max {(ms.Length == 0 ? 0 : ms[^1]):F1} ms";
        return $"Load test: {Clients} clients, {Seconds:F1} s: {Reads + Writes} requests, {RequestsPerSecond:F0} requests/s, {Errors} errors\n" +
               $"  {Line("searches", ReadMilliseconds)}\n  {Line("writes", WriteMilliseconds)}\n" +
               $"  acknowledged items {AcknowledgedItems}, lost {LostItems}";
    }
}

/// <summary>
/// Many concurrent HTTP clients (one <see cref="HttpClient"/> each) against the API over loopback: 80 % searches,
/// 20 % writes of 5 items; afterwards every acknowledged item is read back and compared with its last acknowledged
/// vector (each client writes its own ids, so acknowledgements of one id are ordered).
/// </summary>
public static class LoadTest
{
    public static async Task<LoadReport> RunAsync(Uri address, string key, int dimension, int clients, TimeSpan duration)
    {
        var acknowledged = new ConcurrentDictionary<long, float[]>();
        var reads = new ConcurrentBag<double>();
        var writes = new ConcurrentBag<double>();
        int errors = 0;
        var clock = Stopwatch.StartNew();
        await Task.WhenAll(Enumerable.Range(0, clients).Select(c => Task.Run(async () =>
        {
            using var http = new HttpClient { BaseAddress = address, Timeout = TimeSpan.FromSeconds(60) };
            http.DefaultRequestHeaders.Add("X-Api-Key", key);
            var random = new Random(c);
            long next = 0;
            while (clock.Elapsed < duration)
            {
                bool write = random.Next(5) == 0;
                long start = Stopwatch.GetTimestamp();
                try
                {
                    if (write)
                    {
                        Item[] items = [.. Enumerable.Range(0, 5).Select(_ => new Item((c * 10_000_000L) + (next++ % 2000), Vector(random, dimension)))];
                        using HttpResponseMessage response = await http.PostAsJsonAsync("/items", new UpsertRequest(items));
                        response.EnsureSuccessStatusCode();
                        foreach (Item item in items)
                        {
                            acknowledged[item.Id] = item.Vector!;
                        }

                        writes.Add(Stopwatch.GetElapsedTime(start).TotalMilliseconds);
                    }
                    else
                    {
                        using HttpResponseMessage response = await http.PostAsJsonAsync("/search", new SearchRequest(Vector(random, dimension), 10));
                        response.EnsureSuccessStatusCode();
                        reads.Add(Stopwatch.GetElapsedTime(start).TotalMilliseconds);
                    }
                }
                catch (Exception e) when (e is HttpRequestException or TaskCanceledException)
                {
                    Interlocked.Increment(ref errors);
                }
            }
        })));
        double seconds = clock.Elapsed.TotalSeconds;

        int lost = 0;
        using (var http = new HttpClient { BaseAddress = address })
        {
            await Parallel.ForEachAsync(acknowledged, new ParallelOptions { MaxDegreeOfParallelism = 8 }, async (pair, token) =>
            {
                using HttpResponseMessage response = await http.GetAsync($"/items/{pair.Key}", token);
                Item? stored = response.IsSuccessStatusCode ? await response.Content.ReadFromJsonAsync<Item>(token) : null;
                if (stored?.Vector is null || !stored.Vector.AsSpan().SequenceEqual(pair.Value))
                {
                    Interlocked.Increment(ref lost);
                }
            });
        }

        double[] r = [.. reads.Order()];
        double[] w = [.. writes.Order()];
        return new LoadReport(clients, seconds, r.Length, w.Length, errors, r, w, acknowledged.Count, lost);
    }

    public static float[] Vector(Random random, int dimension)
    {
        var v = new float[dimension];
        for (int i = 0; i < dimension; i++)
        {
            v[i] = (float)((random.NextDouble() * 2) - 1);
        }

        return v;
    }
}

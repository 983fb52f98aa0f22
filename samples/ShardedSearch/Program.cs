using System.Net;
using System.Net.Http.Json;
using System.Text;
using Microsoft.AspNetCore.Hosting.Server;
using Microsoft.AspNetCore.Hosting.Server.Features;
using ShardedSearch;

// Modes: no argument serves until stopped; "demo" starts on a free loopback port, shows the API's rules and a short
// load test, and stops; "load-test [clients] [seconds]" runs only the load test.
string mode = args.Length > 0 ? args[0] : "serve";
if (mode == "serve")
{
    await CatalogueApi.Build(args).RunAsync();
    return 0;
}

string store = Path.Combine(Path.GetTempPath(), "rental-catalogue-" + Guid.NewGuid().ToString("N"));
const string Key = "co-op-desk-key";
const int Dimension = 16;
WebApplication app = CatalogueApi.Build(
[
    "--urls=http://127.0.0.1:0",
    $"--Catalogue:StoreDirectory={store}",
    $"--Catalogue:WriteKey={Key}",
    $"--Catalogue:Dimension={Dimension}",
]);
await app.StartAsync();
try
{
    var address = new Uri(app.Services.GetRequiredService<IServer>().Features.Get<IServerAddressesFeature>()!.Addresses.First());
    if (mode == "load-test")
    {
        int clients = args.Length > 1 ? int.Parse(args[1]) : 32;
        int seconds = args.Length > 2 ? int.Parse(args[2]) : 20;
        Console.WriteLine((await LoadTest.RunAsync(address, Key, Dimension, clients, TimeSpan.FromSeconds(seconds))).ToString());
        return 0;
    }

    await Demo(address);
    Console.WriteLine((await LoadTest.RunAsync(address, Key, Dimension, clients: 16, TimeSpan.FromSeconds(3))).ToString());
    return 0;
}
finally
{
    await app.StopAsync();
    Directory.Delete(store, recursive: true);
}

static async Task Demo(Uri address)
{
    using var anonymous = new HttpClient { BaseAddress = address };
    using var desk = new HttpClient { BaseAddress = address };
    desk.DefaultRequestHeaders.Authorization = new("Bearer", Key);

    // The co-op's gear: five kinds, each a cluster in a 16-dimensional taste space.
    string[] kinds = ["tent", "sleeping bag", "camp stove", "touring kayak", "backcountry ski"];
    var random = new Random(2026);
    float[][] centres = [.. kinds.Select(_ => LoadTest.Vector(random, Dimension))];
    Item[] items = [.. Enumerable.Range(0, 200).Select(i => new Item(i, [.. centres[i % 5].Select(c => c + (0.15f * (float)((random.NextDouble() * 2) - 1)))]))];
    string Name(long id) => $"{kinds[id % 5]} #{id}";

    using HttpResponseMessage refused = await anonymous.PostAsJsonAsync("/items", new UpsertRequest(items));
    using HttpResponseMessage count0 = await anonymous.GetAsync("/items/0");
    Console.WriteLine($"Upsert without the key: {(int)refused.StatusCode}; item #0 afterwards: {(int)count0.StatusCode}");

    using HttpResponseMessage accepted = await desk.PostAsJsonAsync("/items", new UpsertRequest(items));
    WriteResponse? written = await accepted.Content.ReadFromJsonAsync<WriteResponse>();
    Console.WriteLine($"Upsert with the key: {(int)accepted.StatusCode}, {written!.Items} items acknowledged on {written.Shards} shards");

    using HttpResponseMessage found = await anonymous.PostAsJsonAsync("/search", new SearchRequest(items[3].Vector, 5));
    SearchResponse? hits = await found.Content.ReadFromJsonAsync<SearchResponse>();
    Console.WriteLine($"Search like {Name(3)}, k = 5 (partial: {hits!.Partial}):");
    foreach (Hit hit in hits.Hits)
    {
        Console.WriteLine($"  {hit.Distance:F4}  #{hit.Id} {Name(hit.Id)}");
    }

    using HttpResponseMessage filtered = await anonymous.PostAsJsonAsync("/search", new SearchRequest(items[3].Vector, 3, new FilterBody(null, [3], 100, null)));
    SearchResponse? filteredHits = await filtered.Content.ReadFromJsonAsync<SearchResponse>();
    Console.WriteLine($"Filtered (ids from 100, not #3), k = 3: {string.Join(", ", filteredHits!.Hits.Select(h => "#" + h.Id))}");

    using HttpResponseMessage wrongDimension = await anonymous.PostAsJsonAsync("/search", new SearchRequest([1f, 2f], 5));
    Console.WriteLine($"Wrong dimension: {(int)wrongDimension.StatusCode} {await wrongDimension.Content.ReadAsStringAsync()}");
    using HttpResponseMessage badK = await anonymous.PostAsJsonAsync("/search", new SearchRequest(items[3].Vector, 0));
    Console.WriteLine($"k = 0: {(int)badK.StatusCode}");
    using var nan = new StringContent("{\"vector\":[NaN" + string.Concat(Enumerable.Repeat(",0", Dimension - 1)) + "],\"k\":5}", Encoding.UTF8, "application/json");
    using HttpResponseMessage notFinite = await anonymous.PostAsync("/search", nan);
    Console.WriteLine($"NaN in the vector: {(int)notFinite.StatusCode}");
    using var huge = new StringContent("{\"items\":[" + new string(' ', 2 << 20) + "]}", Encoding.UTF8, "application/json");
    // With its length and "Expect: 100-continue" the server refuses the body from the headers, before it is sent.
    using var hugeRequest = new HttpRequestMessage(HttpMethod.Post, "/items") { Content = huge };
    hugeRequest.Headers.ExpectContinue = true;
    using HttpResponseMessage tooLarge = await desk.SendAsync(hugeRequest);
    Console.WriteLine($"A 2 MiB body: {(int)tooLarge.StatusCode}");
    using HttpResponseMessage status = await anonymous.GetAsync("/admin/status");
    Console.WriteLine($"Status without the key: {(int)status.StatusCode}");
    Console.WriteLine($"Status code summary: {(refused.StatusCode, accepted.StatusCode, wrongDimension.StatusCode, tooLarge.StatusCode) == (HttpStatusCode.Unauthorized, HttpStatusCode.OK, HttpStatusCode.BadRequest, HttpStatusCode.RequestEntityTooLarge)}");
}

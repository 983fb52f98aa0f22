using System.Net;
using System.Net.Http.Json;
using System.Text;
using Microsoft.AspNetCore.Builder;
using Microsoft.AspNetCore.Hosting.Server;
using Microsoft.AspNetCore.Hosting.Server.Features;
using Microsoft.Extensions.DependencyInjection;
using ShardedSearch;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using Xunit.Abstractions;

namespace VectorKit.Orleans.Tests;

/// <summary>The HTTP sample driven over loopback with a real client: the edge's rules, answers against one exact index, a bounded load test.</summary>
public sealed class SampleHttpTests(ITestOutputHelper output) : IAsyncLifetime
{
    private const string Key = "desk-key-for-tests";
    private const int Dimension = 8;
    private readonly string _store = Path.Combine(Path.GetTempPath(), "vectorkit-sample-" + Guid.NewGuid().ToString("N"));
    private WebApplication? _app;
    private Uri? _address;

    public async Task InitializeAsync()
    {
        _app = CatalogueApi.Build(["--urls=http://127.0.0.1:0", $"--Catalogue:StoreDirectory={_store}", $"--Catalogue:WriteKey={Key}", $"--Catalogue:Dimension={Dimension}", "--Catalogue:MaxBodyBytes=65536"]);
        await _app.StartAsync();
        _address = new Uri(_app.Services.GetRequiredService<IServer>().Features.Get<IServerAddressesFeature>()!.Addresses.First());
    }

    public async Task DisposeAsync()
    {
        await _app!.StopAsync();
        await _app.DisposeAsync();
        Directory.Delete(_store, recursive: true);
    }

    private HttpClient Client(string? bearer = null, string? apiKey = null)
    {
        var http = new HttpClient { BaseAddress = _address };
        if (bearer is not null)
        {
            http.DefaultRequestHeaders.Authorization = new("Bearer", bearer);
        }

        if (apiKey is not null)
        {
            http.DefaultRequestHeaders.Add("X-Api-Key", apiKey);
        }

        return http;
    }

    [Fact]
    public async Task Writes_need_the_key_and_inputs_are_checked_at_the_edge()
    {
        using HttpClient anonymous = Client();
        using HttpClient wrong = Client(bearer: "not-the-key");
        using HttpClient desk = Client(bearer: Key);
        using HttpClient deskByHeader = Client(apiKey: Key);
        var item = new Item(42, [1, 2, 3, 4, 5, 6, 7, 8]);

        foreach (HttpClient refused in new[] { anonymous, wrong })
        {
            using HttpResponseMessage r = await refused.PostAsJsonAsync("/items", new UpsertRequest([item]));
            Assert.Equal(HttpStatusCode.Unauthorized, r.StatusCode);
            using HttpResponseMessage d = await refused.DeleteAsync("/items/42");
            Assert.Equal(HttpStatusCode.Unauthorized, d.StatusCode);
            using HttpResponseMessage s = await refused.GetAsync("/admin/status");
            Assert.Equal(HttpStatusCode.Unauthorized, s.StatusCode);
        }

        using (HttpResponseMessage absent = await anonymous.GetAsync("/items/42"))
        {
            Assert.Equal(HttpStatusCode.NotFound, absent.StatusCode); // nothing changed
        }

        using (HttpResponseMessage ok = await desk.PostAsJsonAsync("/items", new UpsertRequest([item])))
        {
            Assert.Equal(HttpStatusCode.OK, ok.StatusCode);
        }

        using (HttpResponseMessage ok = await deskByHeader.PostAsJsonAsync("/items", new UpsertRequest([item with { Id = 43 }])))
        {
            Assert.Equal(HttpStatusCode.OK, ok.StatusCode);
        }

        Assert.Equal(item.Vector, (await anonymous.GetFromJsonAsync<Item>("/items/42"))!.Vector);

        async Task<HttpStatusCode> Search(string json)
        {
            using var content = new StringContent(json, Encoding.UTF8, "application/json");
            using HttpResponseMessage r = await anonymous.PostAsync("/search", content);
            return r.StatusCode;
        }

        string eight = "[1,2,3,4,5,6,7,8]";
        Assert.Equal(HttpStatusCode.OK, await Search($"{{\"vector\":{eight},\"k\":5}}"));
        Assert.Equal(HttpStatusCode.BadRequest, await Search("{\"vector\":[1,2,3],\"k\":5}"));
        Assert.Equal(HttpStatusCode.BadRequest, await Search("{\"vector\":[NaN,2,3,4,5,6,7,8],\"k\":5}"));
        Assert.Equal(HttpStatusCode.BadRequest, await Search("{\"vector\":[1e39,2,3,4,5,6,7,8],\"k\":5}"));
        Assert.Equal(HttpStatusCode.BadRequest, await Search($"{{\"vector\":{eight},\"k\":0}}"));
        Assert.Equal(HttpStatusCode.BadRequest, await Search($"{{\"vector\":{eight},\"k\":101}}"));
        Assert.Equal(HttpStatusCode.BadRequest, await Search($"{{\"vector\":{eight},\"k\":5,\"filter\":{{\"from\":9,\"to\":1}}}}"));
        Assert.Equal(HttpStatusCode.BadRequest, await Search("{\"vector\":"));

        // Duplicate ids and wrong dimensions in a write: 400, nothing written.
        using (HttpResponseMessage dup = await desk.PostAsJsonAsync("/items", new UpsertRequest([item with { Id = 7 }, item with { Id = 7 }])))
        {
            Assert.Equal(HttpStatusCode.BadRequest, dup.StatusCode);
        }

        using (HttpResponseMessage dim = await desk.PostAsJsonAsync("/items", new UpsertRequest([new Item(8, [1, 2])])))
        {
            Assert.Equal(HttpStatusCode.BadRequest, dim.StatusCode);
        }

        using (HttpResponseMessage gone = await anonymous.GetAsync("/items/7"))
        {
            Assert.Equal(HttpStatusCode.NotFound, gone.StatusCode);
        }

        // A body over the 64 KiB limit (900 items of about 110 bytes of JSON each): 413, nothing written.
        Item[] many = [.. Enumerable.Range(1000, 900).Select(i => new Item(i, [.. Enumerable.Repeat(0.12345678f, Dimension)]))];
        // Sent with its length and "Expect: 100-continue", so the server refuses it from the headers alone; a body
        // streamed at once could meet a closed connection before the 413 is read.
        using var body = new StringContent(System.Text.Json.JsonSerializer.Serialize(new UpsertRequest(many), new System.Text.Json.JsonSerializerOptions(System.Text.Json.JsonSerializerDefaults.Web)), System.Text.Encoding.UTF8, "application/json");
        using var request = new HttpRequestMessage(HttpMethod.Post, "/items") { Content = body };
        request.Headers.ExpectContinue = true;
        using (HttpResponseMessage big = await desk.SendAsync(request))
        {
            Assert.Equal(HttpStatusCode.RequestEntityTooLarge, big.StatusCode);
        }

        using (HttpResponseMessage gone = await anonymous.GetAsync("/items/1000"))
        {
            Assert.Equal(HttpStatusCode.NotFound, gone.StatusCode);
        }
    }

    [Fact]
    public async Task Search_over_http_equals_one_exact_index_and_a_bounded_load_test_loses_nothing()
    {
        using HttpClient desk = Client(bearer: Key);
        long[] ids = Reference.Ids(600, 4);
        float[] vectors = Reference.Random(ids.Length, Dimension, 5);
        for (int start = 0; start < ids.Length; start += 200)
        {
            Item[] batch = [.. Enumerable.Range(start, 200).Select(i => new Item(ids[i], vectors.AsSpan(i * Dimension, Dimension).ToArray()))];
            using HttpResponseMessage r = await desk.PostAsJsonAsync("/items", new UpsertRequest(batch));
            r.EnsureSuccessStatusCode();
        }

        using ExactIndex single = Reference.Single(ids, vectors, Dimension);
        float[] query = Reference.Random(1, Dimension, 6);
        using HttpResponseMessage found = await desk.PostAsJsonAsync("/search", new SearchRequest(query, 10));
        SearchResponse answer = (await found.Content.ReadFromJsonAsync<SearchResponse>())!;
        Assert.False(answer.Partial);
        Reference.Equal(single.Search(query, 10), [.. answer.Hits.Select(h => new SearchHit(h.Id, h.Distance))], "http search");

        LoadReport report = await LoadTest.RunAsync(_address!, Key, Dimension, clients: 12, TimeSpan.FromSeconds(2));
        output.WriteLine(report.ToString());
        Assert.True(report.Writes > 0 && report.Reads > 0, report.ToString());
        Assert.Equal(0, report.Errors);
        Assert.Equal(0, report.LostItems);
    }
}

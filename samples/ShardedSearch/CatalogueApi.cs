using System.Net;
using System.Net.Sockets;
using System.Security.Cryptography;
using System.Text;
using VectorKit.Indexes;
using VectorKit.Orleans;

namespace ShardedSearch;

/// <summary>
/// The rental co-op's catalogue search as an HTTP back end: one process hosts an Orleans silo (localhost clustering)
/// with a sharded collection and serves search (anyone) and upsert / removal / status (with the key) over HTTP.
/// </summary>
/// <remarks>
/// Configuration: <c>Catalogue:WriteKey</c> (writes and administration need it as <c>Authorization: Bearer KEY</c> or
/// <c>X-Api-Key: KEY</c>; without a key configured every write is refused), <c>Catalogue:StoreDirectory</c>,
/// <c>Catalogue:Dimension</c> (16), <c>Catalogue:Shards</c> (8), <c>Catalogue:MaxBodyBytes</c> (1 MiB),
/// <c>Catalogue:SiloPort</c> / <c>Catalogue:GatewayPort</c> (0 = a free port), and ASP.NET Core's <c>Urls</c>.
/// </remarks>
public static class CatalogueApi
{
    public const int MaxK = 100;
    public const int MaxItemsPerWrite = 1000;

    public static WebApplication Build(string[] args)
    {
        WebApplicationBuilder builder = WebApplication.CreateBuilder(args);
        IConfiguration config = builder.Configuration;
        string store = config["Catalogue:StoreDirectory"] ?? Path.Combine(Path.GetTempPath(), "rental-catalogue-store");
        int dimension = config.GetValue("Catalogue:Dimension", 16);
        int shards = config.GetValue("Catalogue:Shards", 8);
        long maxBody = config.GetValue("Catalogue:MaxBodyBytes", 1L << 20);
        int siloPort = config.GetValue("Catalogue:SiloPort", 0);
        int gatewayPort = config.GetValue("Catalogue:GatewayPort", 0);
        byte[] key = Encoding.UTF8.GetBytes(config["Catalogue:WriteKey"] ?? "");

        builder.WebHost.ConfigureKestrel(k => k.Limits.MaxRequestBodySize = maxBody);
        builder.Logging.SetMinimumLevel(LogLevel.Warning).AddFilter("Orleans", LogLevel.Error);
        builder.UseOrleans(silo => silo
            .UseLocalhostClustering(siloPort == 0 ? FreePort() : siloPort, gatewayPort == 0 ? FreePort() : gatewayPort)
            .AddVectorKitSharding(new LocalDirectoryShardStore(store)));
        builder.Services.AddProblemDetails();

        WebApplication app = builder.Build();
        var definition = new ShardedCollectionDefinition { Name = "catalogue", Dimension = dimension, ShardCount = shards, ReplicaCount = 1 };
        var collection = new Lazy<Task<ShardedVectorCollection>>(() => ShardedVectorCollection.CreateAsync(app.Services.GetRequiredService<IGrainFactory>(), definition));

        if (key.Length == 0)
        {
            app.Logger.LogWarning("Catalogue:WriteKey is not set: every write and status request is refused with 401.");
        }

        // Writes and administration: a key from configuration, compared in constant time; 401 before the body is read.
        bool Authorised(HttpRequest request)
        {
            string? presented = request.Headers["X-Api-Key"];
            string? authorization = request.Headers.Authorization;
            if (presented is null && authorization is not null && authorization.StartsWith("Bearer ", StringComparison.Ordinal))
            {
                presented = authorization["Bearer ".Length..];
            }

            return key.Length > 0 && presented is not null && CryptographicOperations.FixedTimeEquals(Encoding.UTF8.GetBytes(presented), key);
        }

        app.Use(async (context, next) =>
        {
            bool guarded = context.Request.Path.StartsWithSegments("/admin")
                || (context.Request.Path.StartsWithSegments("/items") && !HttpMethods.IsGet(context.Request.Method));
            if (guarded && !Authorised(context.Request))
            {
                context.Response.StatusCode = StatusCodes.Status401Unauthorized;
                context.Response.Headers.WWWAuthenticate = "Bearer";
                await context.Response.WriteAsJsonAsync(new { error = "a write key is required (Authorization: Bearer KEY or X-Api-Key: KEY)" });
                return;
            }

            try
            {
                await next(context);
            }
            catch (BadHttpRequestException e) when (!context.Response.HasStarted)
            {
                context.Response.StatusCode = e.StatusCode; // 413 for an oversized body, 400 for malformed input
                await context.Response.WriteAsJsonAsync(new { error = e.Message });
            }
        });

        app.MapPost("/search", async (SearchRequest request, CancellationToken cancel) =>
        {
            ShardedVectorCollection c = await collection.Value;
            string? problem = CheckVector(request.Vector, dimension, "vector")
                ?? (request.K is < 1 or > MaxK ? $"k must be in [1, {MaxK}]; it is {request.K}." : null)
                ?? CheckFilter(request.Filter);
            if (problem is not null)
            {
                return Results.BadRequest(new { error = problem });
            }

            var options = new ShardedSearchOptions { Filter = request.Filter?.ToIdFilter(), AllowPartial = request.AllowPartial, Timeout = TimeSpan.FromSeconds(5) };
            try
            {
                (SearchHit[] hits, RoutedSearchResult result) = await c.SearchAsync(request.Vector!, request.K, options, cancel);
                return Results.Ok(new SearchResponse([.. hits.Select(h => new Hit(h.Id, h.Distance))], result.IsPartial, result.MissingShards));
            }
            catch (ShardUnavailableException e)
            {
                return Results.Json(new { error = e.Message, shards = e.Shards }, statusCode: StatusCodes.Status503ServiceUnavailable);
            }
        });

        app.MapPost("/items", async (UpsertRequest request, CancellationToken cancel) =>
        {
            ShardedVectorCollection c = await collection.Value;
            if (request.Items is not { Length: > 0 and <= MaxItemsPerWrite })
            {
                return Results.BadRequest(new { error = $"items must hold 1 to {MaxItemsPerWrite} entries." });
            }

            var ids = new long[request.Items.Length];
            var vectors = new float[request.Items.Length * dimension];
            var seen = new HashSet<long>();
            for (int i = 0; i < ids.Length; i++)
            {
                Item item = request.Items[i];
                string? problem = CheckVector(item.Vector, dimension, $"items[{i}].vector") ?? (seen.Add(item.Id) ? null : $"id {item.Id} appears twice.");
                if (problem is not null)
                {
                    return Results.BadRequest(new { error = problem });
                }

                ids[i] = item.Id;
                item.Vector!.CopyTo(vectors, i * dimension);
            }

            ShardWriteAck[] acks = await c.UpsertAsync(ids, vectors, cancel);
            return Results.Ok(new WriteResponse(ids.Length, acks.Length, acks.Sum(a => a.Changed)));
        });

        app.MapDelete("/items/{id:long}", async (long id, CancellationToken cancel) =>
        {
            ShardedVectorCollection c = await collection.Value;
            ShardWriteAck[] acks = await c.RemoveAsync(new[] { id }, cancel);
            return acks.Sum(a => a.Changed) == 1 ? Results.NoContent() : Results.NotFound();
        });

        app.MapGet("/items/{id:long}", async (long id, CancellationToken cancel) =>
        {
            ShardedVectorCollection c = await collection.Value;
            float[]? vector = await c.GetVectorAsync(id, cancel);
            return vector is null ? Results.NotFound() : Results.Ok(new Item(id, vector));
        });

        app.MapGet("/admin/status", async () =>
        {
            ShardedVectorCollection c = await collection.Value;
            ShardStatus[] status = await c.GetStatusAsync(TimeSpan.FromSeconds(5));
            return Results.Ok(status.Select(s => new { s.Shard, s.Replica, s.Available, s.Problem, s.Count, s.Sequence }));
        });

        return app;
    }

    // JSON has no NaN or infinity (the parser refuses them), but a finite literal may still overflow float.
    private static string? CheckVector(float[]? vector, int dimension, string name)
    {
        if (vector is null || vector.Length != dimension)
        {
            return $"{name} must have {dimension} numbers; it has {vector?.Length ?? 0}.";
        }

        int bad = Array.FindIndex(vector, v => !float.IsFinite(v));
        return bad < 0 ? null : $"{name}[{bad}] is not a finite float.";
    }

    private static string? CheckFilter(FilterBody? filter)
    {
        if (filter is null)
        {
            return null;
        }

        try
        {
            filter.ToIdFilter().Validate();
            return null;
        }
        catch (ArgumentException e)
        {
            return e.Message;
        }
    }

    private static int FreePort()
    {
        using var listener = new TcpListener(IPAddress.Loopback, 0);
        listener.Start();
        return ((IPEndPoint)listener.LocalEndpoint).Port;
    }
}

public sealed record Item(long Id, float[]? Vector);

public sealed record UpsertRequest(Item[]? Items);

public sealed record FilterBody(long[]? Only, long[]? Except, long? From, long? To)
{
    public IdFilter ToIdFilter() => new(Only, Except, From, To);
}

public sealed record SearchRequest(float[]? Vector, int K = 10, FilterBody? Filter = null, bool AllowPartial = false);

public sealed record Hit(long Id, float Distance);

public sealed record SearchResponse(Hit[] Hits, bool Partial, int[] MissingShards);

public sealed record WriteResponse(int Items, int Shards, int Replaced);

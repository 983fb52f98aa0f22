using System.Globalization;
using System.Text;
using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Persistence;

namespace VectorKit.Orleans;

/// <summary>
/// An <see cref="IShardStore"/> in a local (or shared network) directory: <c>&lt;root&gt;/&lt;collection&gt;/collection.txt</c>,
/// one snapshot <c>shard-SSSS-QQQQQQQQQQQQQQQQQQQ.vkindex</c> per shard (saved with <see cref="IndexFile.Save(IVectorIndex, string, CancellationToken)"/>:
/// atomic and checksummed; <c>Q</c> is the last log sequence number it holds) and one log <c>shard-SSSS.log</c>.
/// </summary>
/// <remarks>
/// <para>Log appends are flushed to the disk (<see cref="FileStream.Flush(bool)"/> with <see langword="true"/>) before they
/// complete. Log replacement and the definition file go through a temporary file and a rename; the folder itself is
/// not flushed after that rename, so after a power loss (not after a process crash) the previous log may come back,
/// which is harmless: its records are either in the snapshot already or past a torn tail that is cut again.</para>
/// <para>Thread-safe; the cluster's single-writer rule (only a shard's primary writes its files) is the caller's.</para>
/// </remarks>
public sealed class LocalDirectoryShardStore : IShardStore
{
    private const string SnapshotSuffix = ".vkindex";
    private readonly string _root;
    private readonly Lock _definitions = new();

    /// <summary>Uses (and creates when missing) a root directory.</summary>
    /// <param name="root">The root directory; every silo of a cluster must see the same one.</param>
    /// <exception cref="ArgumentException"><paramref name="root"/> is null or empty.</exception>
    public LocalDirectoryShardStore(string root)
    {
        ArgumentException.ThrowIfNullOrEmpty(root);
        _root = Path.GetFullPath(root);
        Directory.CreateDirectory(_root);
    }

    /// <summary>The root directory.</summary>
    public string Root => _root;

    /// <summary>The path of a shard's current snapshot, or <see langword="null"/> when it has none (for tools and tests).</summary>
    /// <param name="collection">The collection name.</param>
    /// <param name="shard">The shard number.</param>
    /// <returns>The path, or <see langword="null"/>.</returns>
    public string? SnapshotPath(string collection, int shard) => Latest(collection, shard)?.Path;

    /// <inheritdoc />
    public Task<bool> CreateCollectionAsync(ShardedCollectionDefinition definition, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(definition);
        definition.Validate();
        string folder = Folder(definition.Name);
        Directory.CreateDirectory(folder);
        string path = Path.Combine(folder, "collection.txt");
        lock (_definitions)
        {
            if (File.Exists(path))
            {
                ShardedCollectionDefinition existing = Parse(File.ReadAllText(path), definition.Name);
                if (existing != definition)
                {
                    throw new InvalidOperationException($"Collection '{definition.Name}' exists with a different definition ({existing}); asked for {definition}.");
                }

                return Task.FromResult(false);
            }

            WriteAtomically(path, Encoding.UTF8.GetBytes(Format(definition)));
            return Task.FromResult(true);
        }
    }

    /// <inheritdoc />
    public Task<ShardedCollectionDefinition?> LoadCollectionAsync(string name, CancellationToken cancellationToken = default)
    {
        ArgumentException.ThrowIfNullOrEmpty(name);
        string path = Path.Combine(Folder(name), "collection.txt");
        return Task.FromResult(File.Exists(path) ? Parse(File.ReadAllText(path), name) : null);
    }

    /// <inheritdoc />
    public Task<(IVectorIndex Index, long Sequence)?> LoadSnapshotAsync(string collection, int shard, CancellationToken cancellationToken = default)
    {
        (string Path, long Sequence)? latest = Latest(collection, shard);
        if (latest is null)
        {
            return Task.FromResult<(IVectorIndex, long)?>(null);
        }

        IVectorIndex index = IndexFile.Load(latest.Value.Path, cancellationToken: cancellationToken);
        return Task.FromResult<(IVectorIndex, long)?>((index, latest.Value.Sequence));
    }

    /// <inheritdoc />
    public Task SaveSnapshotAsync(string collection, int shard, IVectorIndex index, long sequence, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(index);
        string folder = Folder(collection);
        Directory.CreateDirectory(folder);
        string path = Path.Combine(folder, string.Create(CultureInfo.InvariantCulture, $"shard-{shard:D4}-{sequence:D19}{SnapshotSuffix}"));
        IndexFile.Save(index, path, cancellationToken);

        // The new snapshot is durable; older ones are now redundant (a crash before this leaves them, and the highest wins).
        foreach ((string older, long olderSequence) in Snapshots(collection, shard))
        {
            if (olderSequence < sequence)
            {
                File.Delete(older);
                IndexFile.DeleteTemporaryFiles(older);
            }
        }

        return Task.CompletedTask;
    }

    /// <inheritdoc />
    public Task AppendLogAsync(string collection, int shard, ReadOnlyMemory<byte> records, CancellationToken cancellationToken = default)
    {
        cancellationToken.ThrowIfCancellationRequested();
        string folder = Folder(collection);
        Directory.CreateDirectory(folder);
        using var stream = new FileStream(LogPath(collection, shard), FileMode.Append, FileAccess.Write, FileShare.ReadWrite | FileShare.Delete);
        stream.Write(records.Span);
        stream.Flush(flushToDisk: true);
        return Task.CompletedTask;
    }

    /// <inheritdoc />
    public Task<byte[]> ReadLogAsync(string collection, int shard, CancellationToken cancellationToken = default)
    {
        string path = LogPath(collection, shard);
        try
        {
            using var stream = new FileStream(path, FileMode.Open, FileAccess.Read, FileShare.ReadWrite | FileShare.Delete);
            var bytes = new byte[stream.Length];
            stream.ReadExactly(bytes);
            return Task.FromResult(bytes);
        }
        catch (FileNotFoundException)
        {
            return Task.FromResult(Array.Empty<byte>());
        }
        catch (DirectoryNotFoundException)
        {
            return Task.FromResult(Array.Empty<byte>());
        }
    }

    /// <inheritdoc />
    public Task ReplaceLogAsync(string collection, int shard, ReadOnlyMemory<byte> records, CancellationToken cancellationToken = default)
    {
        cancellationToken.ThrowIfCancellationRequested();
        Directory.CreateDirectory(Folder(collection));
        WriteAtomically(LogPath(collection, shard), records.Span);
        return Task.CompletedTask;
    }

    private string Folder(string collection) => Path.Combine(_root, collection);

    private string LogPath(string collection, int shard) => Path.Combine(Folder(collection), string.Create(CultureInfo.InvariantCulture, $"shard-{shard:D4}.log"));

    private (string Path, long Sequence)? Latest(string collection, int shard)
    {
        (string, long)? best = null;
        foreach ((string path, long sequence) in Snapshots(collection, shard))
        {
            if (best is null || sequence > best.Value.Item2)
            {
                best = (path, sequence);
            }
        }

        return best;
    }

    private IEnumerable<(string Path, long Sequence)> Snapshots(string collection, int shard)
    {
        string folder = Folder(collection);
        if (!Directory.Exists(folder))
        {
            yield break;
        }

        string prefix = string.Create(CultureInfo.InvariantCulture, $"shard-{shard:D4}-");
        foreach (string path in Directory.EnumerateFiles(folder, prefix + "*" + SnapshotSuffix))
        {
            string name = Path.GetFileName(path);
            string digits = name[prefix.Length..^SnapshotSuffix.Length];
            if (long.TryParse(digits, NumberStyles.None, CultureInfo.InvariantCulture, out long sequence))
            {
                yield return (path, sequence);
            }
        }
    }

    private static void WriteAtomically(string path, ReadOnlySpan<byte> bytes)
    {
        string temporary = path + ".tmp-" + Guid.NewGuid().ToString("N");
        try
        {
            using (var stream = new FileStream(temporary, FileMode.CreateNew, FileAccess.Write))
            {
                stream.Write(bytes);
                stream.Flush(flushToDisk: true);
            }

            File.Move(temporary, path, overwrite: true);
        }
        finally
        {
            File.Delete(temporary);
        }
    }

    private static string Format(ShardedCollectionDefinition d) => string.Create(
        CultureInfo.InvariantCulture,
        $"name={d.Name}\ndimension={d.Dimension}\nmetric={d.Metric}\nshards={d.ShardCount}\nreplicas={d.ReplicaCount}\nkind={d.IndexKind}\n" +
        $"graph-links={d.GraphLinksPerNode}\ngraph-build-width={d.GraphBuildWidth}\ngraph-search-width={d.GraphSearchWidth}\nsnapshot-every={d.SnapshotEveryWrites}\n");

    private static ShardedCollectionDefinition Parse(string text, string name)
    {
        var fields = new Dictionary<string, string>(StringComparer.Ordinal);
        foreach (string line in text.Split('\n', StringSplitOptions.RemoveEmptyEntries))
        {
            int eq = line.IndexOf('=', StringComparison.Ordinal);
            if (eq > 0)
            {
                fields[line[..eq]] = line[(eq + 1)..];
            }
        }

        try
        {
            static int? Optional(string s) => s.Length == 0 ? null : int.Parse(s, CultureInfo.InvariantCulture);
            var definition = new ShardedCollectionDefinition
            {
                Name = fields["name"],
                Dimension = int.Parse(fields["dimension"], CultureInfo.InvariantCulture),
                Metric = Enum.Parse<DistanceMetric>(fields["metric"]),
                ShardCount = int.Parse(fields["shards"], CultureInfo.InvariantCulture),
                ReplicaCount = int.Parse(fields["replicas"], CultureInfo.InvariantCulture),
                IndexKind = Enum.Parse<ShardIndexKind>(fields["kind"]),
                GraphLinksPerNode = Optional(fields["graph-links"]),
                GraphBuildWidth = Optional(fields["graph-build-width"]),
                GraphSearchWidth = Optional(fields["graph-search-width"]),
                SnapshotEveryWrites = int.Parse(fields["snapshot-every"], CultureInfo.InvariantCulture),
            };
            definition.Validate();
            if (definition.Name != name)
            {
                throw new FormatException($"it names collection '{definition.Name}'");
            }

            return definition;
        }
        catch (Exception e) when (e is KeyNotFoundException or FormatException or ArgumentException or OverflowException)
        {
            throw new InvalidDataException($"The definition of collection '{name}' is damaged: {e.Message}", e);
        }
    }
}

using System.Diagnostics.CodeAnalysis;
using System.Runtime.CompilerServices;
using Microsoft.Extensions.VectorData;
using Microsoft.Extensions.VectorData.ProviderServices;

namespace VectorKit.VectorData;

/// <summary>
/// A vector store whose collections live in process, searched through VectorKit's indexes, and optionally saved to a
/// directory (one file per collection holding its index, records and key map).
/// </summary>
/// <remarks>
/// <para>Thread safety: every member may be called concurrently. Collection objects for one name share its data.</para>
/// <para>Collection names may use letters, digits, '-', '_' and '.', 1 to 128 characters, not starting with '.', so
/// that each maps to one file name on every platform.</para>
/// </remarks>
public sealed class VectorKitStore : VectorStore
{
    /// <summary>The system name reported in metadata and exceptions.</summary>
    public const string SystemName = "vectorkit";

    /// <summary>The extension of a collection file in the store directory.</summary>
    public const string FileExtension = ".vkcollection";

    private readonly Dictionary<string, CollectionState> _states = new(StringComparer.Ordinal);
    private readonly Lock _gate = new();
    private readonly VectorStoreMetadata _metadata;
    private bool _disposed;

    /// <summary>Creates a store with the given options (memory only by default).</summary>
    /// <param name="options">The options; <see langword="null"/> for <see cref="VectorKitStoreOptions.Default"/>.</param>
    /// <exception cref="ArgumentException">The directory is given but empty.</exception>
    public VectorKitStore(VectorKitStoreOptions? options = null)
    {
        Options = options ?? VectorKitStoreOptions.Default;
        if (Options.Directory is { } directory)
        {
            ArgumentException.ThrowIfNullOrWhiteSpace(directory, "options.Directory");
            Directory.CreateDirectory(directory);
        }

        _metadata = new VectorStoreMetadata { VectorStoreSystemName = SystemName, VectorStoreName = Options.Directory };
    }

    /// <summary>The store's options.</summary>
    public VectorKitStoreOptions Options { get; }

    /// <inheritdoc/>
    /// <exception cref="ArgumentException">The name is not a valid collection name, or <typeparamref name="TRecord"/> is a dictionary (use <see cref="GetDynamicCollection"/>).</exception>
    /// <exception cref="NotSupportedException">The key type, an index kind or a distance function is not supported.</exception>
    [RequiresDynamicCode("This overload uses reflection over the record type; use a definition with a dynamic collection under native AOT.")]
    [RequiresUnreferencedCode("This overload uses reflection over the record type; use a definition with a dynamic collection when trimming.")]
    public override VectorKitCollection<TKey, TRecord> GetCollection<TKey, TRecord>(string name, VectorStoreCollectionDefinition? definition = null)
    {
        CheckName(name);
        if (typeof(TRecord) == typeof(Dictionary<string, object?>))
        {
            throw new ArgumentException(VectorDataStrings.GetCollectionWithDictionaryNotSupported, nameof(TRecord));
        }

        return new VectorKitCollection<TKey, TRecord>(this, name, new VectorKitCollectionOptions { Definition = definition }, dynamic: false);
    }

    /// <summary>Gets a collection with the given options (a definition, an embedding generator of its own).</summary>
    /// <typeparam name="TKey">The key type: <see cref="int"/>, <see cref="long"/>, <see cref="Guid"/> or <see cref="string"/>.</typeparam>
    /// <typeparam name="TRecord">The record type.</typeparam>
    /// <param name="name">The collection's name.</param>
    /// <param name="options">The collection's options.</param>
    /// <returns>A collection object; the collection itself exists once <c>EnsureCollectionExistsAsync</c> has run.</returns>
    /// <exception cref="ArgumentException">The name is not a valid collection name.</exception>
    [RequiresDynamicCode("This overload uses reflection over the record type.")]
    [RequiresUnreferencedCode("This overload uses reflection over the record type.")]
    public VectorKitCollection<TKey, TRecord> GetCollection<TKey, TRecord>(string name, VectorKitCollectionOptions options)
        where TKey : notnull
        where TRecord : class
    {
        CheckName(name);
        return new VectorKitCollection<TKey, TRecord>(this, name, options, dynamic: false);
    }

    /// <inheritdoc/>
    /// <exception cref="ArgumentException">The name is not a valid collection name.</exception>
    public override VectorKitCollection<object, Dictionary<string, object?>> GetDynamicCollection(string name, VectorStoreCollectionDefinition definition)
    {
        CheckName(name);
        ArgumentNullException.ThrowIfNull(definition);
        return new VectorKitCollection<object, Dictionary<string, object?>>(this, name, new VectorKitCollectionOptions { Definition = definition }, dynamic: true);
    }

    /// <inheritdoc/>
    public override async IAsyncEnumerable<string> ListCollectionNamesAsync([EnumeratorCancellation] CancellationToken cancellationToken = default)
    {
        var names = new SortedSet<string>(StringComparer.Ordinal);
        lock (_gate)
        {
            names.UnionWith(_states.Keys);
        }

        if (Options.Directory is { } directory)
        {
            foreach (string file in Directory.EnumerateFiles(directory, "*" + FileExtension))
            {
                string name = Path.GetFileName(file)[..^FileExtension.Length];
                if (IsValidName(name))
                {
                    names.Add(name);
                }
            }
        }

        foreach (string name in names)
        {
            cancellationToken.ThrowIfCancellationRequested();
            yield return name;
            await Task.CompletedTask.ConfigureAwait(false);
        }
    }

    /// <inheritdoc/>
    public override Task<bool> CollectionExistsAsync(string name, CancellationToken cancellationToken = default)
    {
        CheckName(name);
        cancellationToken.ThrowIfCancellationRequested();
        lock (_gate)
        {
            return Task.FromResult(_states.ContainsKey(name) || (FilePath(name) is { } path && File.Exists(path)));
        }
    }

    /// <inheritdoc/>
    /// <remarks>Also deletes the collection's file in the store directory.</remarks>
    public override Task EnsureCollectionDeletedAsync(string name, CancellationToken cancellationToken = default)
    {
        CheckName(name);
        cancellationToken.ThrowIfCancellationRequested();
        DeleteState(name);
        return Task.CompletedTask;
    }

    /// <summary>Saves every collection in memory to the store directory, each atomically (see <see cref="VectorKitCollection{TKey, TRecord}.SaveAsync"/>).</summary>
    /// <param name="cancellationToken">Cancels between collections, or within one before its rename.</param>
    /// <returns>A task that completes when every collection is saved.</returns>
    /// <exception cref="InvalidOperationException">The store has no directory.</exception>
    /// <exception cref="VectorStoreException">A file could not be written.</exception>
    public async Task SaveAsync(CancellationToken cancellationToken = default)
    {
        List<CollectionState> states;
        lock (_gate)
        {
            states = [.. _states.Values];
        }

        foreach (CollectionState state in states)
        {
            await SaveStateAsync(state, cancellationToken).ConfigureAwait(false);
        }
    }

    /// <inheritdoc/>
    public override object? GetService(Type serviceType, object? serviceKey = null)
    {
        ArgumentNullException.ThrowIfNull(serviceType);
        return serviceKey is not null ? null
            : serviceType == typeof(VectorStoreMetadata) ? _metadata
            : serviceType.IsInstanceOfType(this) ? this
            : null;
    }

    /// <inheritdoc/>
    protected override void Dispose(bool disposing)
    {
        if (disposing)
        {
            lock (_gate)
            {
                if (!_disposed)
                {
                    _disposed = true;
                    foreach (CollectionState state in _states.Values)
                    {
                        state.Dispose();
                    }

                    _states.Clear();
                }
            }
        }

        base.Dispose(disposing);
    }

    internal bool TryGetState(string name, string operation, [NotNullWhen(true)] out CollectionState? state)
    {
        lock (_gate)
        {
            ObjectDisposedException.ThrowIf(_disposed, this);
            if (_states.TryGetValue(name, out state))
            {
                return true;
            }

            if (FilePath(name) is not { } path || !File.Exists(path))
            {
                return false;
            }

            try
            {
                state = CollectionState.Load(File.ReadAllBytes(path), name, Options, CancellationToken.None);
            }
            catch (IOException e)
            {
                throw new VectorStoreException($"Collection '{name}' could not be loaded from '{path}': {e.Message}", e)
                {
                    VectorStoreSystemName = SystemName,
                    VectorStoreName = Options.Directory,
                    CollectionName = name,
                    OperationName = operation,
                };
            }
            catch (NotSupportedException e)
            {
                throw new VectorStoreException($"Collection '{name}' in '{path}' uses a setting this build does not support: {e.Message}", e)
                {
                    VectorStoreSystemName = SystemName,
                    CollectionName = name,
                    OperationName = operation,
                };
            }

            _states[name] = state;
            return true;
        }
    }

    internal CollectionState GetOrCreateState(string name, CollectionModel model)
    {
        lock (_gate)
        {
            if (TryGetState(name, "EnsureCollectionExists", out CollectionState? existing))
            {
                return existing;
            }

            var state = new CollectionState(name, model.KeyProperty.Type);
            foreach (VectorPropertyModel vector in model.VectorProperties)
            {
                state.Slots[vector.StorageName] = new VectorSlot(
                    vector.StorageName,
                    vector.Dimensions,
                    VectorSlot.ResolveIndexKind(vector.StorageName, vector.IndexKind),
                    VectorSlot.ResolveDistanceFunction(vector.StorageName, vector.DistanceFunction),
                    Options.TrainingThreshold);
            }

            foreach (DataPropertyModel data in model.DataProperties)
            {
                if (data.IsFullTextIndexed)
                {
                    state.EnsureFullText(data.StorageName);
                }
            }

            _states[name] = state;
            return state;
        }
    }

    internal void DeleteState(string name)
    {
        lock (_gate)
        {
            ObjectDisposedException.ThrowIf(_disposed, this);
            if (_states.Remove(name, out CollectionState? state))
            {
                state.Lock.EnterWriteLock();
                try
                {
                    state.Deleted = true;
                }
                finally
                {
                    state.Lock.ExitWriteLock();
                }

                state.Dispose();
            }

            if (FilePath(name) is { } path)
            {
                try
                {
                    File.Delete(path);
                }
                catch (IOException e)
                {
                    throw new VectorStoreException($"The file of collection '{name}' could not be deleted: {e.Message}", e) { CollectionName = name, OperationName = "EnsureCollectionDeleted" };
                }
            }
        }
    }

    internal async Task SaveStateAsync(CollectionState state, CancellationToken cancellationToken)
    {
        string path = FilePath(state.Name) ?? throw new InvalidOperationException("The store has no directory to save to; set VectorKitStoreOptions.Directory.");
        string temporary = $"{path}.{Guid.NewGuid():N}.tmp";
        try
        {
            await using (var file = new FileStream(temporary, FileMode.CreateNew, FileAccess.Write, FileShare.None, 1 << 16, FileOptions.Asynchronous))
            {
                using var buffer = new MemoryStream();
                state.Lock.EnterReadLock();
                try
                {
                    if (state.Deleted)
                    {
                        throw new VectorStoreException($"Collection '{state.Name}' was deleted.") { CollectionName = state.Name, OperationName = "Save" };
                    }

                    state.Save(buffer, cancellationToken);
                }
                finally
                {
                    state.Lock.ExitReadLock();
                }

                buffer.Position = 0;
                await buffer.CopyToAsync(file, cancellationToken).ConfigureAwait(false);
                file.Flush(flushToDisk: true);
            }

            cancellationToken.ThrowIfCancellationRequested();
            File.Move(temporary, path, overwrite: true);
        }
        catch (IOException e)
        {
            throw new VectorStoreException($"Collection '{state.Name}' could not be saved to '{path}': {e.Message}", e)
            {
                VectorStoreSystemName = SystemName,
                VectorStoreName = Options.Directory,
                CollectionName = state.Name,
                OperationName = "Save",
            };
        }
        finally
        {
            if (File.Exists(temporary))
            {
                File.Delete(temporary);
            }
        }
    }

    private string? FilePath(string name) => Options.Directory is { } directory ? Path.Combine(directory, name + FileExtension) : null;

    private static void CheckName(string name)
    {
        ArgumentNullException.ThrowIfNull(name);
        if (!IsValidName(name))
        {
            throw new ArgumentException($"Collection name '{name}' is not valid: use 1 to 128 letters, digits, '-', '_' or '.', not starting with '.'.", nameof(name));
        }
    }

    private static bool IsValidName(string name)
    {
        if (name.Length is 0 or > 128 || name[0] == '.')
        {
            return false;
        }

        foreach (char c in name)
        {
            if (!(char.IsAsciiLetterOrDigit(c) || c is '-' or '_' or '.'))
            {
                return false;
            }
        }

        return true;
    }
}

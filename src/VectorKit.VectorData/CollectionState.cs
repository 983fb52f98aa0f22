using System.IO.Hashing;
using System.Text;
using VectorKit.Indexes;
using VectorKit.Persistence;

namespace VectorKit.VectorData;

/// <summary>
/// The data of one named collection, shared by every collection object the store hands out for that name: records,
/// key map, one index per vector property and one BM25 index per full-text property, under one reader/writer lock.
/// </summary>
/// <remarks>
/// Reads (gets, searches, saves) hold the read lock and run concurrently; writes (upserts, deletes) hold the write
/// lock. Embedding generation happens before the lock is taken.
/// </remarks>
internal sealed class CollectionState : IDisposable
{
    private static ReadOnlySpan<byte> Magic => "VKVDCOL1"u8;

    private const int FormatVersion = 1;

    public CollectionState(string name, Type keyType)
    {
        Name = name;
        KeyType = keyType;
    }

    public string Name { get; }

    public Type KeyType { get; }

    public ReaderWriterLockSlim Lock { get; } = new(LockRecursionPolicy.NoRecursion);

    public Dictionary<object, long> Ids { get; } = new(KeyComparer.Instance);

    // Ids are assigned from 0 upwards and checked to be below 2^31 on load, so the default hash cannot be made to collide.
    public Dictionary<long, StoredRecord> Records { get; } = [];

    public Dictionary<string, VectorSlot> Slots { get; } = new(StringComparer.Ordinal);

    public Dictionary<string, Bm25Index> FullText { get; } = new(StringComparer.Ordinal);

    public long NextId { get; set; }

    /// <summary>Set when the collection is deleted: collection objects still holding it see it as gone.</summary>
    public bool Deleted { get; set; }

    /// <summary>Adds a BM25 index for a full-text property the collection lacks, built from the stored records. Caller holds the write lock.</summary>
    public void EnsureFullText(string storageName)
    {
        if (FullText.ContainsKey(storageName))
        {
            return;
        }

        var index = new Bm25Index();
        foreach (StoredRecord record in Records.Values)
        {
            index.Set(record.Id, record.Values.GetValueOrDefault(storageName) as string);
        }

        FullText[storageName] = index;
    }

    /// <summary>Writes the collection (index per vector property, records with keys, full-text property names) to a stream. Caller holds the read lock.</summary>
    public void Save(Stream destination, CancellationToken cancellationToken)
    {
        using var body = new MemoryStream();
        using (var writer = new BinaryWriter(body, Encoding.UTF8, leaveOpen: true))
        {
            writer.Write(Magic);
            writer.Write(FormatVersion);
            writer.Write(Name);
            writer.Write(KeyTypeCode(KeyType));
            writer.Write(NextId);
            writer.Write(FullText.Count);
            foreach (string name in FullText.Keys)
            {
                writer.Write(name);
            }

            writer.Write(Slots.Count);
            foreach (VectorSlot slot in Slots.Values)
            {
                writer.Write(slot.StorageName);
                writer.Write(slot.Dimension);
                writer.Write(slot.IndexKind);
                writer.Write(slot.DistanceFunction);
                writer.Write(slot.Switched);
                using var indexBytes = new MemoryStream();
                IndexFile.Save(slot.Index, indexBytes, cancellationToken);
                writer.Write(checked((int)indexBytes.Length));
                writer.Write(indexBytes.GetBuffer(), 0, (int)indexBytes.Length);
            }

            writer.Write(Records.Count);
            foreach (StoredRecord record in Records.Values)
            {
                cancellationToken.ThrowIfCancellationRequested();
                writer.Write(record.Id);
                ValueCodec.Write(writer, record.Key);
                writer.Write(record.Values.Count);
                foreach ((string name, object? value) in record.Values)
                {
                    writer.Write(name);
                    ValueCodec.Write(writer, value);
                }
            }
        }

        ulong hash = XxHash64.HashToUInt64(body.GetBuffer().AsSpan(0, (int)body.Length));
        destination.Write(body.GetBuffer(), 0, (int)body.Length);
        Span<byte> trailer = stackalloc byte[8];
        System.Buffers.Binary.BinaryPrimitives.WriteUInt64LittleEndian(trailer, hash);
        destination.Write(trailer);
    }

    /// <summary>Reads a collection written by <see cref="Save"/>, every count checked before use and the limits applied.</summary>
    /// <exception cref="CollectionFileException">The file is damaged, truncated or breaks a limit.</exception>
    /// <exception cref="IndexFileException">An embedded index is damaged or breaks a limit.</exception>
    public static CollectionState Load(ReadOnlySpan<byte> file, string expectedName, VectorKitStoreOptions options, CancellationToken cancellationToken)
    {
        if (file.Length < Magic.Length + 8 || !file.StartsWith(Magic))
        {
            throw new CollectionFileException("not a VectorKit collection file (magic bytes differ)");
        }

        ReadOnlySpan<byte> body = file[..^8];
        if (XxHash64.HashToUInt64(body) != System.Buffers.Binary.BinaryPrimitives.ReadUInt64LittleEndian(file[^8..]))
        {
            throw new CollectionFileException("checksum mismatch: the file is damaged or was cut short");
        }

        var cursor = new FileCursor(body, options.MaxStringBytes);
        cursor.Bytes(Magic.Length);
        int version = cursor.Int32();
        if (version != FormatVersion)
        {
            throw new CollectionFileException($"format version {version} is not supported (this build reads {FormatVersion})");
        }

        string name = cursor.String();
        if (name != expectedName)
        {
            throw new CollectionFileException($"the file holds collection '{name}', expected '{expectedName}'");
        }

        var state = new CollectionState(name, KeyTypeOf(cursor.Byte()));
        try
        {
            state.NextId = cursor.Int64();
            if (state.NextId < 0 || state.NextId > int.MaxValue)
            {
                throw new CollectionFileException($"next id {state.NextId} is outside [0, {int.MaxValue}]");
            }

            var fullText = new List<string>();
            int fullTextCount = cursor.Count(1);
            for (int i = 0; i < fullTextCount; i++)
            {
                fullText.Add(cursor.String());
            }

            int slotCount = cursor.Count(1);
            for (int i = 0; i < slotCount; i++)
            {
                string storageName = cursor.String();
                int dimension = cursor.Int32();
                string kind = VectorSlot.ResolveIndexKind(storageName, cursor.String());
                string distance = VectorSlot.ResolveDistanceFunction(storageName, cursor.String());
                bool switched = cursor.Byte() != 0;
                int length = cursor.Count(1);
                IVectorIndex index;
                using (var stream = new MemoryStream(cursor.Bytes(length).ToArray(), writable: false))
                {
                    index = IndexFile.Load(stream, options.IndexLoadOptions, cancellationToken);
                }

                if (!state.Slots.TryAdd(storageName, new VectorSlot(storageName, dimension, kind, distance, options.TrainingThreshold, index, switched)))
                {
                    index.Dispose();
                    throw new CollectionFileException($"vector property '{storageName}' appears twice");
                }
            }

            int recordCount = cursor.Count(8 + 1 + 4);
            if (recordCount > options.MaxRecords)
            {
                throw new CollectionFileException($"{recordCount} records exceed the limit of {options.MaxRecords}");
            }

            for (int i = 0; i < recordCount; i++)
            {
                cancellationToken.ThrowIfCancellationRequested();
                long id = cursor.Int64();
                object key = ValueCodec.Read(ref cursor) ?? throw new CollectionFileException($"record {i} has a null key");
                if (key.GetType() != state.KeyType)
                {
                    throw new CollectionFileException($"record {i} has a key of type {key.GetType()}, the collection's keys are {state.KeyType}");
                }

                if (id < 0 || id >= state.NextId)
                {
                    throw new CollectionFileException($"record {i} has id {id}, outside [0, {state.NextId})");
                }

                int valueCount = cursor.Count(2);
                var values = new Dictionary<string, object?>(valueCount, StringComparer.Ordinal);
                for (int j = 0; j < valueCount; j++)
                {
                    string property = cursor.String();
                    if (!values.TryAdd(property, ValueCodec.Read(ref cursor)))
                    {
                        throw new CollectionFileException($"record {i} has property '{property}' twice");
                    }
                }

                if (!state.Ids.TryAdd(key, id) || !state.Records.TryAdd(id, new StoredRecord(id, key, values)))
                {
                    throw new CollectionFileException($"record {i} repeats key '{key}' or id {id}");
                }
            }

            if (cursor.Remaining != 0)
            {
                throw new CollectionFileException($"{cursor.Remaining} unexpected bytes after the records");
            }

            foreach (VectorSlot slot in state.Slots.Values)
            {
                foreach (long id in slot.Index.GetIds())
                {
                    if (!state.Records.TryGetValue(id, out StoredRecord? record) || record.Values.GetValueOrDefault(slot.StorageName) is not float[])
                    {
                        throw new CollectionFileException($"the index of '{slot.StorageName}' holds id {id}, which has no record with that vector");
                    }
                }
            }

            foreach (string property in fullText)
            {
                state.EnsureFullText(property);
            }

            return state;
        }
        catch
        {
            state.Dispose();
            throw;
        }
    }

    private static byte KeyTypeCode(Type type) =>
        type == typeof(int) ? (byte)1 : type == typeof(long) ? (byte)2 : type == typeof(Guid) ? (byte)3 : (byte)4;

    private static Type KeyTypeOf(byte code) => code switch
    {
        1 => typeof(int),
        2 => typeof(long),
        3 => typeof(Guid),
        4 => typeof(string),
        _ => throw new CollectionFileException($"unknown key type code {code}"),
    };

    public void Dispose()
    {
        foreach (VectorSlot slot in Slots.Values)
        {
            slot.Dispose();
        }
    }
}

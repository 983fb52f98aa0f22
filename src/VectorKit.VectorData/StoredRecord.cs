namespace VectorKit.VectorData;

/// <summary>
/// One record as stored: its key, its internal index id, and its values by storage name (data values in their stored
/// form, vectors as <c>float[]</c>). Never changed after it is stored; an upsert stores a new one, so readers under
/// the collection's read lock see a whole record.
/// </summary>
internal sealed class StoredRecord(long id, object key, Dictionary<string, object?> values)
{
    public long Id { get; } = id;

    public object Key { get; } = key;

    public Dictionary<string, object?> Values { get; } = values;
}

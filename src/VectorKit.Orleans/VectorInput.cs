namespace VectorKit.Orleans;

/// <summary>Checks vector rows at the cluster's edge, before anything is sent to a shard.</summary>
internal static class VectorInput
{
    public static void CheckRows(ReadOnlySpan<float> rows, int count, int dimension, string name)
    {
        if (rows.Length != (long)count * dimension)
        {
            throw new ArgumentException($"Expected {count} rows of dimension {dimension} ({(long)count * dimension} floats); got {rows.Length} floats.", name);
        }

        for (int i = 0; i < rows.Length; i++)
        {
            if (!float.IsFinite(rows[i]))
            {
                throw new ArgumentException($"Row {i / dimension}, element {i % dimension} is {rows[i]}; vectors must be finite.", name);
            }
        }
    }

    public static void CheckDistinct(ReadOnlySpan<long> ids, string name)
    {
        var seen = new HashSet<long>(ids.Length);
        foreach (long id in ids)
        {
            if (!seen.Add(id))
            {
                throw new ArgumentException($"Id {id} appears more than once in one write.", name);
            }
        }
    }
}

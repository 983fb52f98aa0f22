using System.Collections.Concurrent;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>
/// The full vectors of a contract test's items by id, for the variants that re-score from an external source. The
/// suite writes every vector into it before handing the vector to the index (an external source must hold the vector
/// of every id added, and a replaced id's new vector), and puts the previous vectors back when the index rejects or
/// abandons the write. Thread-safe: searches read it while a writer replaces vectors.
/// </summary>
internal sealed class ContractSource(int dimension) : IFullVectorSource
{
    private readonly ConcurrentDictionary<long, float[]> _vectors = new();

    public int Dimension => dimension;

    public bool TryGetVector(long id, Span<float> destination)
    {
        if (!_vectors.TryGetValue(id, out float[]? vector))
        {
            return false;
        }

        vector.CopyTo(destination);
        return true;
    }

    /// <summary>Stores the rows under their ids and returns what they replaced (null for ids that were absent).</summary>
    public List<(long Id, float[]? Previous)> Put(ReadOnlySpan<long> ids, ReadOnlySpan<float> rows)
    {
        var previous = new List<(long, float[]?)>(ids.Length);
        for (int i = 0; i < ids.Length; i++)
        {
            float[] row = rows.Slice(i * dimension, dimension).ToArray();
            _vectors.TryGetValue(ids[i], out float[]? old);
            previous.Add((ids[i], old));
            _vectors[ids[i]] = row;
        }

        return previous;
    }

    /// <summary>Puts back what <see cref="Put"/> replaced, last first (so an id repeated in a batch gets its first value back).</summary>
    public void Restore(List<(long Id, float[]? Previous)> previous)
    {
        for (int i = previous.Count - 1; i >= 0; i--)
        {
            (long id, float[]? old) = previous[i];
            if (old is null)
            {
                _vectors.TryRemove(id, out _);
            }
            else
            {
                _vectors[id] = old;
            }
        }
    }
}

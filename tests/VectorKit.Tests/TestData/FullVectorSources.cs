using VectorKit.IO;
using VectorKit.Reranking;
using VectorKit.Indexes;

namespace VectorKit.Tests.TestData;

/// <summary>Where a test's full vectors come from.</summary>
public enum FullVectorSourceKind
{
    /// <summary>A .npy file read on demand through <see cref="FileVectorSource"/>.</summary>
    NpyFile,

    /// <summary>A caller's own in-memory store (<see cref="FullVectorSources.DictionarySource"/>).</summary>
    InMemory,
}

/// <summary>Full-vector sources for the external re-scoring tests of every index kind.</summary>
internal static class FullVectorSources
{
    /// <summary>Writes the rows to a new .npy file in <paramref name="directory"/> in three batches, as a loader streaming a data set would, and opens it with row r as <c>ids[r]</c>.</summary>
    public static FileVectorSource WriteNpy(string directory, float[] data, long[] ids, int dimension)
    {
        string path = Path.Combine(directory, $"full-{Guid.NewGuid():N}.npy");
        using (NpyRowWriter writer = NpyRowWriter.Create(path, dimension))
        {
            int rows = data.Length / dimension;
            int first = rows / 6, second = rows * 3 / 4;
            writer.Append(data.AsSpan(0, first * dimension));
            writer.Append(data.AsSpan(first * dimension, (second - first) * dimension));
            writer.Append(data.AsSpan(second * dimension, (rows - second) * dimension));
            writer.Complete();
        }

        return FileVectorSource.OpenNpy(path, ids);
    }

    /// <summary>Opens a source of <paramref name="kind"/> over the rows; returns what the caller must dispose (or null).</summary>
    public static IDisposable? Open(FullVectorSourceKind kind, string directory, float[] data, long[] ids, int dimension, out IFullVectorSource source)
    {
        if (kind == FullVectorSourceKind.NpyFile)
        {
            FileVectorSource file = WriteNpy(directory, data, ids, dimension);
            source = file;
            return file;
        }

        var byId = new Dictionary<long, float[]>();
        for (int i = 0; i < ids.Length; i++)
        {
            byId[ids[i]] = data.AsSpan(i * dimension, dimension).ToArray();
        }

        source = new DictionarySource(byId, dimension);
        return null;
    }

    /// <summary>Row r of an array is id r.</summary>
    public sealed class RowSource(float[] data, int dimension) : IFullVectorSource
    {
        public int Dimension => dimension;

        public bool TryGetVector(long id, Span<float> destination)
        {
            if (id < 0 || id >= data.Length / dimension)
            {
                return false;
            }

            data.AsSpan((int)id * dimension, dimension).CopyTo(destination);
            return true;
        }
    }

    /// <summary>Vectors held by id in a dictionary, as a caller's own store would hold them.</summary>
    public sealed class DictionarySource(Dictionary<long, float[]> vectors, int dimension) : IFullVectorSource
    {
        public int Dimension => dimension;

        public bool TryGetVector(long id, Span<float> destination)
        {
            if (!vectors.TryGetValue(id, out float[]? vector))
            {
                return false;
            }

            vector.CopyTo(destination);
            return true;
        }
    }
}

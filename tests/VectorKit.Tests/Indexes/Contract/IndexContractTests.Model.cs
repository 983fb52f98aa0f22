using FsCheck.Xunit;
using VectorKit.Distance;
using VectorKit.Indexes;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>Random sequences of writes against a dictionary model of the index.</summary>
public abstract partial class IndexContractTests
{
    private const int ModelDimension = 8;

    /// <summary>
    /// Each number of <paramref name="operations"/> picks a write (Add, AddRange, AddOrReplace, Remove, RemoveRange),
    /// ids from a small range (so duplicates, replacements and missing ids are common) and vectors from a seed. A write
    /// the model says must fail has to throw its documented exception and change nothing. Afterwards the ids agree with
    /// the model, every live item is found at its own stored vector, and an exact variant answers as brute force over the
    /// model does.
    /// </summary>
    [Property(MaxTest = 40, EndSize = 60)]
    public void RandomWrites_AgreeWithADictionaryModel(int[] operations)
    {
        const int d = ModelDimension;
        using IVectorIndex index = Create(d, DistanceMetric.SquaredEuclidean);
        var model = new Dictionary<long, float[]>();
        foreach (int operation in operations)
        {
            var random = new Random(operation);
            long Id() => random.Next(24) - 4;
            float[] Vectors(int rows) => ContractData.Rows(rows, d, random.Next());
            switch ((operation & int.MaxValue) % 5)
            {
                case 0:
                {
                    long id = Id();
                    float[] vector = Vectors(1);
                    if (model.ContainsKey(id))
                    {
                        Assert.ThrowsAny<ArgumentException>(() => Add(index, id, vector));
                    }
                    else
                    {
                        Add(index, id, vector);
                        model[id] = vector;
                    }

                    break;
                }

                case 1:
                {
                    long[] ids = Enumerable.Range(0, 1 + random.Next(5)).Select(_ => Id()).ToArray();
                    float[] rows = Vectors(ids.Length);
                    if (ids.Distinct().Count() != ids.Length || ids.Any(model.ContainsKey))
                    {
                        Assert.ThrowsAny<ArgumentException>(() => AddRange(index, ids, rows));
                    }
                    else
                    {
                        AddRange(index, ids, rows);
                        for (int r = 0; r < ids.Length; r++)
                        {
                            model[ids[r]] = Row(rows, r, d);
                        }
                    }

                    break;
                }

                case 2:
                {
                    long id = Id();
                    float[] vector = Vectors(1);
                    Assert.Equal(model.ContainsKey(id), AddOrReplace(index, id, vector));
                    model[id] = vector;
                    break;
                }

                case 3:
                {
                    long id = Id();
                    if (model.Remove(id))
                    {
                        index.Remove(id);
                    }
                    else
                    {
                        Assert.Throws<KeyNotFoundException>(() => index.Remove(id));
                    }

                    break;
                }

                default:
                {
                    long[] ids = Enumerable.Range(0, 1 + random.Next(4)).Select(_ => Id()).ToArray();
                    if (ids.Distinct().Count() != ids.Length)
                    {
                        Assert.ThrowsAny<ArgumentException>(() => index.RemoveRange(ids));
                    }
                    else if (!ids.All(model.ContainsKey))
                    {
                        Assert.Throws<KeyNotFoundException>(() => index.RemoveRange(ids));
                    }
                    else
                    {
                        index.RemoveRange(ids);
                        foreach (long id in ids)
                        {
                            model.Remove(id);
                        }
                    }

                    break;
                }
            }

            Assert.Equal(model.Count, index.Count);
        }

        Assert.Equal(model.Keys.Order(), index.GetIds());
        var stored = new float[d];
        foreach ((long id, float[] vector) in model)
        {
            Assert.True(index.TryGetVector(id, stored));
            AssertStoredVector(index, vector, stored);
            SearchHit[] hits = index.Search(stored, K, WideSearch);
            Assert.Contains(hits, h => h.Id == id);
        }

        if (IsExact && model.Count > 0)
        {
            var reference = new NaiveIndex(d, DistanceMetric.SquaredEuclidean);
            foreach ((long id, float[] vector) in model)
            {
                reference.Add(id, vector);
            }

            float[] queries = Queries(4, d, seed: operations.Length);
            for (int q = 0; q < 4; q++)
            {
                float[] query = Row(queries, q, d);
                Assert.Equal(reference.Ranked(query).Take(5).Select(t => t.Id), index.Search(query, 5).Select(h => h.Id));
            }
        }
    }
}

using System.Diagnostics;
using VectorKit.Indexes;
using VectorKit.Persistence;
using Xunit;

namespace VectorKit.Tests.Persistence.Mapped;

/// <summary>Checks shared by the mapped-opening tests of every kind.</summary>
internal static class MappedChecks
{
    /// <summary>The mapped index holds the saved one's ids and vectors, and agrees on ids it does not hold.</summary>
    public static void AssertSameStoredItems(IVectorIndex saved, IVectorIndex mapped, ReadOnlySpan<long> absent)
    {
        Assert.Equal(saved.GetIds(), mapped.GetIds());
        var expected = new float[saved.Dimension];
        var actual = new float[saved.Dimension];
        foreach (long id in saved.GetIds())
        {
            Assert.True(mapped.Contains(id));
            Assert.True(saved.TryGetVector(id, expected));
            Assert.True(mapped.TryGetVector(id, actual));
            Assert.Equal(expected, actual);
        }

        foreach (long id in absent)
        {
            Assert.Equal(saved.Contains(id), mapped.Contains(id));
        }
    }

    /// <summary>
    /// Opens <paramref name="inputs"/> mutations of the <paramref name="corpus"/> files mapped (checksums mostly fixed
    /// up, so the damage reaches the index; half under <see cref="MappedOpenOptions.Untrusted"/>): each must fail with
    /// <see cref="IndexFileException"/> or open and answer searches and lookups, never reading outside the mapping.
    /// </summary>
    public static void OpenMutations(IReadOnlyList<byte[]> corpus, int inputs, int seed, Func<byte[], string> write)
    {
        int opened = 0;
        var clock = Stopwatch.StartNew();
        for (int input = 0; input < inputs; input++)
        {
            var random = new Random(seed + (input * 7919));
            byte[] bytes = IndexFileFuzzTests.Mutate(corpus[random.Next(corpus.Count)], random);
            if (random.Next(4) != 0)
            {
                IndexFileBytes.FixChecksums(bytes);
            }

            MappedOpenOptions options = random.Next(2) == 0 ? MappedOpenOptions.Default : MappedOpenOptions.Untrusted;
            IVectorIndex mapped;
            try
            {
                mapped = IndexFile.OpenMapped(write(bytes), options);
            }
            catch (Exception e) when (e is IndexFileException or NotSupportedException)
            {
                continue;
            }

            opened++;
            using (mapped)
            {
                try
                {
                    Exercise(mapped, random);
                }
                catch (InvalidDataException) when (!options.VerifyContents)
                {
                    // An unverified id order that names an impossible row: refused, never followed.
                }
                catch (Exception e) when (e is InvalidOperationException && mapped is ITrainableIndex { IsTrained: false })
                {
                    // An untrained index refuses searches, as a loaded one does.
                }
            }

            Assert.True(clock.Elapsed < TimeSpan.FromMinutes(3), $"input {input} took the run past three minutes");
        }

        Assert.True(opened > 20, $"only {opened} of {inputs} mutated files opened; the mutations no longer reach the mapped index");
    }

    private static void Exercise(IVectorIndex mapped, Random random)
    {
        int d = mapped.Dimension;
        var query = new float[d];
        for (int i = 0; i < d; i++)
        {
            query[i] = (float)(random.NextDouble() - 0.5);
        }

        // No source is attached: an index that re-scores from one searches on its codes alone.
        int? depth = mapped.Options.FullVectors == FullVectorLocation.ExternalSource ? 0 : null;
        mapped.Search(query, 5, new SearchOptions { SearchWidth = Math.Max(1, random.Next(1, 20)), RescoreDepth = depth });
        mapped.Search(query, 3, new SearchOptions { Filter = id => id % 3 != 0, RescoreDepth = depth });
        var row = new float[d];
        foreach (long id in mapped.GetIds().Take(20))
        {
            mapped.Contains(id);
            mapped.TryGetVector(id, row);
        }

        mapped.Contains(random.NextInt64());
    }

    /// <summary>
    /// Every write to <paramref name="mapped"/> (adds, replacements, removals, compaction, training) throws
    /// <see cref="NotSupportedException"/> with <paramref name="message"/>; <paramref name="present"/> is an id it holds,
    /// <paramref name="row"/> a valid vector, <paramref name="sample"/> a valid training sample.
    /// </summary>
    public static void AssertWritesRefused(VectorIndex mapped, long present, float[] row, float[] sample, string message)
    {
        foreach (Action write in new Action[]
        {
            () => mapped.Add(5, row),
            () => mapped.AddRange([5, 6], [.. row, .. row]),
            () => mapped.AddOrReplace(present, row),
            () => mapped.AddOrReplaceRange([present], row),
            () => mapped.Remove(present),
            () => mapped.RemoveRange([present]),
            () => mapped.Compact(),
            () => mapped.Train(sample),
        })
        {
            NotSupportedException e = Assert.Throws<NotSupportedException>(write);
            Assert.Equal(message, e.Message);
        }
    }
}

using System.Diagnostics;
using Xunit.Abstractions;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Persistence;
using VectorKit.SaveChild;
using VectorKit.Tests.TestData;

namespace VectorKit.Tests.Persistence;

/// <summary>
/// A process killed with SIGKILL at any point of <see cref="IndexFile.Save(IVectorIndex, string, CancellationToken)"/>
/// over an existing index leaves, under the target's name, either the previous file or the complete new one, which
/// loads and searches like a brute-force reference; whatever else it leaves is a recognisable temporary file.
/// </summary>
[Trait("Category", "Crash")]
public sealed class CrashConsistencyTests : IDisposable
{
    // The new index: 100,000 × 64 float32, about 26 MB, so the save runs through about 25 writes of 1 MiB.
    private const int NewCount = 100_000;
    private const int OldCount = 3_000;
    private const int Dimension = 64;
    private const ulong NewSeed = 20261202;
    private const ulong OldSeed = 77;
    private const int K = 10;

    private readonly ITestOutputHelper _output;
    private readonly string _folder = Directory.CreateTempSubdirectory("vk-crash-").FullName;
    private readonly string _target;

    public CrashConsistencyTests(ITestOutputHelper output)
    {
        _output = output;
        _target = Path.Combine(_folder, "catalogue.vkx");
    }

    public void Dispose() => Directory.Delete(_folder, recursive: true);

    [Fact]
    public void AProcessKilledAnywhereInASave_LeavesThePreviousOrTheNewFile_AndOnlyRecognisableTemporaries()
    {
        var old = new Generation("previous", OldCount, OldSeed);
        var fresh = new Generation("new", NewCount, NewSeed);
        File.WriteAllBytes(_target, old.Bytes);
        long full = fresh.Bytes.Length;

        // Paused kills: the child stops with exactly this many bytes in its temporary file, then dies. The points cover
        // the empty file, the preamble, the header's end, every section's frame, payload start, middle and end, and
        // all bytes written but not yet flushed to disk or renamed (-1).
        var points = new SortedSet<long> { 0, 1, 16, IndexFileBytes.HeaderEnd(fresh.Bytes) - 1, full - 1, full };
        foreach (SectionSpan s in IndexFileBytes.Map(fresh.Bytes))
        {
            points.UnionWith([s.FrameStart + 8, s.PayloadStart, s.PayloadStart + (s.Length / 2), s.ChecksumStart + 4]);
        }

        for (int quarter = 1; quarter < 4; quarter++)
        {
            points.Add(full * quarter / 4);
        }

        points.RemoveWhere(p => p < 0 || p > full);
        var stages = new List<string>();
        foreach (long point in points.Append(-1))
        {
            using var child = ChildSave.Start("pause", _target, NewCount, Dimension, NewSeed, point);
            child.Expect("ready");
            child.Expect("paused");
            child.Kill();
            string temporary = Assert.Single(Temporaries());
            Assert.Equal(point < 0 ? full : point, new FileInfo(temporary).Length);
            stages.Add(Check($"paused at {point}", old, fresh));
        }

        // Free-running kills of the public save: each waits until the temporary file has grown to a share of the full
        // size (0: as soon as it exists; 1: complete, so the flush to disk or the rename is under way) and kills at once.
        // Where the kill lands depends on the machine; every outcome is checked the same way.
        foreach (double share in new[] { -1, 0, 0.1, 0.25, 0.4, 0.55, 0.7, 0.85, 1, 2 })
        {
            using var child = ChildSave.Start("save", _target, NewCount, Dimension, NewSeed);
            child.Expect("ready");
            if (share >= 2)
            {
                // After the save returned: the new file, complete.
                child.Expect("saved");
            }
            else if (share >= 0)
            {
                WaitForTemporary(child, (long)(share * full));
            }

            child.Kill();
            string left = Check($"free-running, share {share}", old, fresh);
            _output.WriteLine($"free-running kill at share {share} of the temporary file: {left}");
            stages.Add(left);
        }

        foreach (IGrouping<string, string> group in stages.GroupBy(s => s))
        {
            _output.WriteLine($"{group.Count(),3} kills left {group.Key}");
        }

        // The paused kills alone put every point in the temporary file and left the previous file in place.
        Assert.Equal(points.Count + 1, stages.Take(points.Count + 1).Count(s => s.StartsWith("previous file, temporary", StringComparison.Ordinal)));
    }

    /// <summary>
    /// After a kill: the target is byte for byte the previous or the new file and loads and searches like the
    /// reference; any other file is one temporary of this save, a prefix of the new file that fails to load as
    /// truncated (or the whole new file), and <see cref="IndexFile.DeleteTemporaryFiles"/> removes exactly it. Then
    /// puts the previous file back. Returns what the kill left.
    /// </summary>
    private string Check(string when, Generation old, Generation fresh)
    {
        byte[] now = File.ReadAllBytes(_target);
        bool replaced = now.AsSpan().SequenceEqual(fresh.Bytes);
        Assert.True(replaced || now.AsSpan().SequenceEqual(old.Bytes), $"{when}: the target is neither the previous nor the new file ({now.Length} bytes)");
        Generation expected = replaced ? fresh : old;
        using (ExactIndex loaded = IndexFile.Load<ExactIndex>(_target))
        {
            expected.AssertSearches(loaded, when);
        }

        string[] temporaries = Temporaries();
        Assert.True(temporaries.Length <= 1, $"{when}: {temporaries.Length} temporary files");
        string left = replaced ? "new file" : "previous file";
        if (temporaries.Length == 1)
        {
            byte[] partial = File.ReadAllBytes(temporaries[0]);
            Assert.True(fresh.Bytes.AsSpan().StartsWith(partial), $"{when}: the temporary file is not a prefix of the new file");
            if (partial.Length < fresh.Bytes.Length)
            {
                var e = Assert.Throws<IndexFileException>(() => IndexFile.Load(temporaries[0]).Dispose());
                Assert.Contains(partial.Length == 0 ? "it has 0 bytes" : "truncated", e.Message, StringComparison.Ordinal);
                left += partial.Length == 0 ? ", temporary empty" : ", temporary partial";
            }
            else
            {
                left += ", temporary complete";
            }
        }

        Assert.Equal(temporaries, IndexFile.DeleteTemporaryFiles(_target));
        Assert.Equal([_target], Directory.GetFiles(_folder));
        if (replaced)
        {
            File.WriteAllBytes(_target, old.Bytes);
        }

        return left;
    }

    private string[] Temporaries()
    {
        string[] others = Directory.GetFiles(_folder).Where(f => f != _target).Order(StringComparer.Ordinal).ToArray();
        foreach (string file in others)
        {
            Assert.True(IndexFile.IsTemporaryFor(Path.GetFileName(file), Path.GetFileName(_target)), $"an unexpected file was left: {file}");
        }

        return others;
    }

    /// <summary>Polls until the child's temporary file holds at least <paramref name="bytes"/> bytes, or the child's save is past it.</summary>
    private void WaitForTemporary(ChildSave child, long bytes)
    {
        var guard = Stopwatch.StartNew();
        bool seen = false;
        while (guard.Elapsed < TimeSpan.FromSeconds(120))
        {
            string? temporary = Directory.EnumerateFiles(_folder, ".catalogue.vkx.*.tmp").FirstOrDefault();
            if (temporary is null)
            {
                // Not created yet, or already renamed: the kill then lands after the rename.
                if (seen || child.HasExited)
                {
                    return;
                }

                Thread.Yield();
                continue;
            }

            seen = true;
            try
            {
                if (new FileInfo(temporary).Length >= bytes)
                {
                    return;
                }
            }
            catch (FileNotFoundException)
            {
                return;
            }

            Thread.Yield();
        }

        Assert.Fail($"the child's temporary file did not reach {bytes} bytes");
    }

    /// <summary>One index the test saves: its bytes and a brute-force reference for a few queries.</summary>
    private sealed class Generation
    {
        private readonly float[] _vectors;
        private readonly float[][] _queries;
        private long[][]? _nearest;

        public Generation(string name, int count, ulong seed)
        {
            Name = name;
            Count = count;
            _vectors = CrashSample.Vectors(count, Dimension, seed);
            using ExactIndex index = CrashSample.Build(count, Dimension, seed);
            Bytes = IndexFileBytes.Save(index);
            float[] queryData = CrashSample.Vectors(4, Dimension, seed + 1);
            _queries = Enumerable.Range(0, 4).Select(q => queryData.AsSpan(q * Dimension, Dimension).ToArray()).ToArray();
        }

        public string Name { get; }

        public int Count { get; }

        public byte[] Bytes { get; }

        public void AssertSearches(ExactIndex loaded, string when)
        {
            Assert.Equal(Count, loaded.Count);
            _nearest ??= _queries.Select(query => Enumerable.Range(0, Count)
                .Select(row => (Id: CrashSample.Id(row), Distance: DoubleMath.SquaredEuclidean(query, _vectors.AsSpan(row * Dimension, Dimension))))
                .OrderBy(h => h.Distance).ThenBy(h => h.Id).Take(K).Select(h => h.Id).ToArray()).ToArray();
            for (int q = 0; q < _queries.Length; q++)
            {
                Assert.True(_nearest[q].SequenceEqual(loaded.Search(_queries[q], K).Select(h => h.Id)), $"{when}: the {Name} file's search differs from the brute-force reference");
            }
        }
    }
}

using System.Buffers.Binary;
using System.IO.Hashing;
using System.Text;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.IO;
using VectorKit.Persistence;

namespace VectorKit.Fuzz;

/// <summary>What a target made of one input.</summary>
internal enum FuzzOutcome
{
    /// <summary>The input was read (and the result used) without any exception.</summary>
    Accepted,

    /// <summary>The input was refused with an exception the API documents for bad data.</summary>
    Rejected,
}

/// <summary>
/// The fuzz targets: one per parser of untrusted bytes. Each feeds an input to the public API as a caller would and
/// uses what it returns a little. An exception the API documents for bad data (IndexFileException, DataFormatException,
/// and InvalidOperationException where a reader documents it) is caught and gives <see cref="FuzzOutcome.Rejected"/>;
/// any other exception escapes and is a finding. The afl harness (Program.cs) and the replay test in
/// tests/VectorKit.Tests share this file, so both judge an input the same way.
/// </summary>
internal static class FuzzTargets
{
    /// <summary>The targets, by the name the harness takes as its argument (and the corpus folder's name).</summary>
    public static IReadOnlyList<string> Names { get; } =
        ["index", "index-raw", "index-mapped", "npy", "fvecs", "ivecs", "bvecs", "idx", "csv", "neighbors", "file-source"];

    // Data readers run under the default limits: what a caller gets without asking for anything. A property, not a
    // field: this class's static constructor must not run instrumented code before SharpFuzz has set up afl's memory.
    private static DataReadLimits Limits => DataReadLimits.Default;

    /// <summary>
    /// The most managed bytes one input of <paramref name="inputLength"/> bytes may make a target allocate (all its reads
    /// together) before it counts as a finding: 32 bytes per input byte plus 16 MiB for an index (Untrusted caps the
    /// dimension at 4,096), or plus 256 MiB for a data-set reader, where one row at the default
    /// <see cref="DataReadLimits.MaxDimension"/> (2^24 floats, 64 MiB) may be allocated before its data arrives on a
    /// stream of unknown length, and a target reads each input up to three ways. <c>VECTORKIT_FUZZ_MAX_ALLOC_MB</c>
    /// replaces the fixed part.
    /// </summary>
    public static long AllocationCap(string target, int inputLength)
    {
        long fixedPart = target.StartsWith("index", StringComparison.Ordinal) ? 16L << 20 : 256L << 20;
        if (long.TryParse(Environment.GetEnvironmentVariable("VECTORKIT_FUZZ_MAX_ALLOC_MB"), out long mb) && mb > 0)
        {
            fixedPart = mb << 20;
        }

        return fixedPart + (32L * inputLength);
    }

    /// <summary>Runs one input through one target.</summary>
    /// <exception cref="ArgumentException">The target name is unknown.</exception>
    public static FuzzOutcome Run(string target, byte[] input) => target switch
    {
        "index" => Index(Reseal(input)),
        "index-raw" => Index(input),
        "index-mapped" => Mapped(Reseal(input)),
        "npy" => Npy(input),
        "fvecs" => Vecs(input, VecsElementType.Float32),
        "ivecs" => Vecs(input, VecsElementType.Int32),
        "bvecs" => Vecs(input, VecsElementType.UInt8),
        "idx" => Idx(input),
        "csv" => Csv(input),
        "neighbors" => Neighbors(input),
        "file-source" => FileSource(input),
        _ => throw new ArgumentException($"unknown target '{target}'; targets: {string.Join(", ", Names)}", nameof(target)),
    };

    // ---- Index files -------------------------------------------------------------------------------------------

    // Loads from a seekable stream (sizes checked against the length) and from a non-seekable one (buffers grow as
    // data arrives); an index that loads is used.
    private static FuzzOutcome Index(byte[] input)
    {
        FuzzOutcome outcome = FuzzOutcome.Accepted;
        try
        {
            using IVectorIndex index = IndexFile.Load(new MemoryStream(input, writable: false), IndexLoadOptions.Untrusted);
            Exercise(index);
        }
        catch (IndexFileException)
        {
            outcome = FuzzOutcome.Rejected;
        }

        try
        {
            using IVectorIndex index = IndexFile.Load(new ForwardOnlyStream(input), IndexLoadOptions.Untrusted);
            _ = index.Count;
        }
        catch (IndexFileException)
        {
            outcome = FuzzOutcome.Rejected;
        }

        return outcome;
    }

    // Opens the input as a file mapped in place (any kind), verified (the untrusted preset)
    // and unverified; an index that opens is read and searched. Unverified, a damaged id order may be
    // refused on use with InvalidDataException, as documented; nothing may read outside the mapping.
    private static FuzzOutcome Mapped(byte[] input)
    {
        string path = Path.Combine(Path.GetTempPath(), $"vectorkit-fuzz-{Environment.ProcessId}-{Guid.NewGuid():N}.vkx");
        File.WriteAllBytes(path, input);
        FuzzOutcome outcome = FuzzOutcome.Accepted;
        try
        {
            foreach (MappedOpenOptions options in new[] { MappedOpenOptions.Untrusted, MappedOpenOptions.Default })
            {
                try
                {
                    using IVectorIndex index = IndexFile.OpenMapped(path, options);
                    ExerciseMapped(index);
                }
                catch (Exception e) when (e is IndexFileException or NotSupportedException || (e is InvalidDataException && !options.VerifyContents))
                {
                    outcome = FuzzOutcome.Rejected;
                }
            }
        }
        finally
        {
            File.Delete(path);
        }

        return outcome;
    }

    private static void ExerciseMapped(IVectorIndex index)
    {
        int d = index.Dimension;
        float[] query = new float[d];
        query[0] = 1;
        _ = index.MemoryBytes;
        long[] ids = index.GetIds();
        foreach (long id in ids.Take(8))
        {
            index.Contains(id);
            index.TryGetVector(id, new float[d]);
        }

        index.Contains(long.MinValue + 17);
        if (index is ITrainableIndex { IsTrained: false })
        {
            return;
        }

        var options = new SearchOptions { MaxDegreeOfParallelism = 1, RescoreDepth = index.Options.FullVectors == FullVectorLocation.ExternalSource ? 0 : null };
        index.Search(query, 5, options);
        index.SearchBatch([.. query, .. query], 3, options);

        // An inverted file: every list probed too, so each list's codes and ids are read; a graph: a beam as wide as
        // the file, so every link the walk reaches is followed, and a filtered search.
        if (index is Indexes.InvertedFile.InvertedFileIndex lists)
        {
            index.Search(query, 5, new SearchOptions { MaxDegreeOfParallelism = 1, RescoreDepth = options.RescoreDepth, SearchWidth = lists.Options.ListCount });
        }
        else if (index is Indexes.Graph.GraphIndex)
        {
            index.Search(query, 5, new SearchOptions { MaxDegreeOfParallelism = 1, RescoreDepth = options.RescoreDepth, SearchWidth = Math.Max(1, Math.Min(ids.Length, 10_000)) });
            index.Search(query, 5, new SearchOptions { MaxDegreeOfParallelism = 1, RescoreDepth = options.RescoreDepth, Filter = id => (id & 1) == 0 });
        }
    }

    // A loaded index must work: count, ids, vectors, plain/filtered/batch searches, an add and a removal.
    private static void Exercise(IVectorIndex index)
    {
        int d = index.Dimension;
        float[] query = new float[d];
        for (int j = 0; j < d; j++)
        {
            query[j] = (((j * 7) % 5) - 2) * 0.25f;
        }

        query[0] += 1;
        _ = index.Count;
        _ = index.MemoryBytes;
        long[] ids = index.GetIds();
        if (ids.Length > 0)
        {
            index.TryGetVector(ids[0], new float[d]);
            index.Contains(ids[^1]);
        }

        // An untrained inverted file loads as such and must refuse searches as a fresh one does.
        if (index is ITrainableIndex { IsTrained: false })
        {
            try
            {
                index.Search(query, 1);
            }
            catch (IndexNotTrainedException)
            {
                return;
            }

            throw new FuzzFindingException("an untrained index answered a search");
        }

        // A loaded index that re-scores from an external source has none until one is attached.
        if (index is IExternalFullVectors { ReadsFullVectorsExternally: true, FullVectorSource: null } external)
        {
            external.AttachFullVectors(new AnyIdSource(d));
        }

        var serial = new SearchOptions { MaxDegreeOfParallelism = 1 };
        index.Search(query, 5, serial);
        index.Search(query, 3, new SearchOptions { Filter = id => (id & 1) == 0, SearchWidth = 4, MaxDegreeOfParallelism = 1 });
        index.SearchBatch([.. query, .. query], 4, serial);
        const long fresh = long.MinValue + 17;
        if (!index.Contains(fresh))
        {
            index.Add(fresh, query);
            index.Search(query, 5, serial);
            index.Remove(fresh);
        }

        if (ids.Length > 0)
        {
            index.Remove(ids[0]);
            index.Search(query, 2, serial);
        }
    }

    /// <summary>
    /// Recomputes the header checksum and the checksum of every complete section (found by following the frames'
    /// lengths), so mutations reach the structural checks behind the XXH3 checks. Works on a copy; never throws.
    /// </summary>
    public static byte[] Reseal(byte[] input)
    {
        const int preamble = 16;
        byte[] file = (byte[])input.Clone();
        if (file.Length < preamble)
        {
            return file;
        }

        int headerLength = BinaryPrimitives.ReadInt32LittleEndian(file.AsSpan(12));
        if (headerLength < 0 || (long)preamble + headerLength + 8 > file.Length)
        {
            return file;
        }

        BinaryPrimitives.WriteUInt64LittleEndian(file.AsSpan(preamble + headerLength), XxHash3.HashToUInt64(file.AsSpan(0, preamble + headerLength)));
        long at = preamble + headerLength + 8;
        while (at + 16 <= file.Length)
        {
            long length = BinaryPrimitives.ReadInt64LittleEndian(file.AsSpan((int)at + 8));
            long payload = (at + 16 + 63) / 64 * 64;
            if (length < 0 || length > file.Length || payload + length + 8 > file.Length)
            {
                break;
            }

            BinaryPrimitives.WriteUInt64LittleEndian(file.AsSpan((int)(payload + length)), XxHash3.HashToUInt64(file.AsSpan((int)payload, (int)length)));
            at = payload + length + 8;
        }

        return file;
    }

    // ---- Data-set readers --------------------------------------------------------------------------------------

    private static FuzzOutcome Npy(byte[] input)
    {
        var outcome = new Outcome();
        outcome.Try(() => Use(NpyFile.ReadVectors(new MemoryStream(input, writable: false), Limits)), allowInvalidOperation: true);
        outcome.Try(() => Use(NpyFile.ReadIntegers(new MemoryStream(input, writable: false), Limits)), allowInvalidOperation: true);
        outcome.Try(() => Stream(new NpyReader(new ForwardOnlyStream(input), limits: Limits)), allowInvalidOperation: true);
        return outcome.Result;
    }

    private static FuzzOutcome Vecs(byte[] input, VecsElementType type)
    {
        var outcome = new Outcome();
        outcome.Try(
            () =>
            {
                var stream = new MemoryStream(input, writable: false);
                switch (type)
                {
                    case VecsElementType.Float32:
                        Use(VecsFile.ReadFvecs(stream, Limits));
                        break;
                    case VecsElementType.Int32:
                        Use(VecsFile.ReadIvecs(stream, Limits));
                        break;
                    default:
                        Use(VecsFile.ReadBvecs(stream, Limits));
                        break;
                }
            },
            allowInvalidOperation: true);
        outcome.Try(() => Stream(new VecsReader(new ForwardOnlyStream(input), type, limits: Limits)), allowInvalidOperation: true);
        return outcome.Result;
    }

    private static FuzzOutcome Idx(byte[] input)
    {
        var outcome = new Outcome();
        outcome.Try(() => Use(IdxFile.ReadVectors(new MemoryStream(input, writable: false), Limits)), allowInvalidOperation: true);
        outcome.Try(() => Use(IdxFile.ReadLabels(new MemoryStream(input, writable: false), Limits)), allowInvalidOperation: true);
        outcome.Try(() => Stream(new IdxReader(new ForwardOnlyStream(input), limits: Limits)), allowInvalidOperation: true);
        return outcome.Result;
    }

    private static FuzzOutcome Csv(byte[] input)
    {
        string text = Encoding.UTF8.GetString(input);
        var outcome = new Outcome();
        outcome.Try(() => Use(CsvVectors.Read(new StringReader(text), null, Limits)), allowInvalidOperation: true);
        outcome.Try(() => Use(CsvVectors.Read(new StringReader(text), new CsvVectorOptions { Separator = ';', HasHeader = true }, Limits)), allowInvalidOperation: true);
        return outcome.Result;
    }

    // Ground-truth neighbour files: .npy (int32/int64) when the input starts with the npy magic, else .ivecs.
    private static FuzzOutcome Neighbors(byte[] input)
    {
        var outcome = new Outcome();
        outcome.Try(
            () => Use(IsNpy(input)
                ? NpyFile.ReadNeighbors(new MemoryStream(input, writable: false), Limits)
                : VecsFile.ReadNeighbors(new MemoryStream(input, writable: false), Limits)),
            allowInvalidOperation: true);
        return outcome.Result;
    }

    private static bool IsNpy(byte[] input) => input.Length >= 6 && input[0] == 0x93 && input.AsSpan(1, 5).SequenceEqual("NUMPY"u8);

    // Random-access full-vector sources over a file: .npy when it starts with the npy magic, else .fvecs.
    private static FuzzOutcome FileSource(byte[] input)
    {
        string path = Path.Combine(ScratchFolder, $"input-{Environment.ProcessId}-{Environment.CurrentManagedThreadId}.bin");
        File.WriteAllBytes(path, input);
        try
        {
            var outcome = new Outcome();
            outcome.Try(
                () =>
                {
                    using FileVectorSource source = IsNpy(input) ? FileVectorSource.OpenNpy(path, null, Limits) : FileVectorSource.OpenFvecs(path, null, Limits);
                    long count = source.Count;
                    float[] row = new float[count > 0 ? source.Dimension : 1];
                    foreach (long id in count > 0 ? new[] { 0, 1, count / 2, count - 1, count, -1 } : [])
                    {
                        source.TryGetVector(id, row);
                    }
                },
                allowInvalidOperation: false);
            return outcome.Result;
        }
        finally
        {
            File.Delete(path);
        }
    }

    private static string ScratchFolder
    {
        get
        {
            string folder = Path.Combine(Directory.Exists("/dev/shm") ? "/dev/shm" : Path.GetTempPath(), "vectorkit-fuzz");
            Directory.CreateDirectory(folder);
            return folder;
        }
    }

    // Streams a reader to its end in small blocks, which is the other code path from the whole-file reads.
    private static void Stream(VectorReader reader)
    {
        using (reader)
        {
            foreach (VectorSet block in reader.ReadBlocks(7))
            {
                Use(block);
            }
        }
    }

    private static void Use(VectorSet set)
    {
        float sum = 0;
        foreach (float value in set.AsSpan())
        {
            sum += value;
        }

        GC.KeepAlive(sum);
    }

    private static void Use(IntVectorSet set)
    {
        long sum = 0;
        foreach (int value in set.AsSpan())
        {
            sum += value;
        }

        GC.KeepAlive(sum);
    }

    private static void Use(int[] labels) => GC.KeepAlive(labels.Sum(l => (long)l));

    private static void Use(NeighborTable table)
    {
        long sum = 0;
        for (int q = 0; q < table.QueryCount; q++)
        {
            foreach (long id in table[q])
            {
                sum += id;
            }
        }

        GC.KeepAlive(sum);
    }

    /// <summary>Collects the outcome of several reads of one input: rejected when any of them was.</summary>
    private sealed class Outcome
    {
        public FuzzOutcome Result { get; private set; } = FuzzOutcome.Accepted;

        public void Try(Action read, bool allowInvalidOperation)
        {
            try
            {
                read();
            }
            catch (DataFormatException)
            {
                Result = FuzzOutcome.Rejected;
            }
            catch (InvalidOperationException) when (allowInvalidOperation)
            {
                // Documented by the whole-file readers: a floating-point dtype read as integers, or data too large for one array.
                Result = FuzzOutcome.Rejected;
            }
        }
    }

    /// <summary>A stream that cannot seek, so readers cannot know its length and must grow buffers with the data.</summary>
    private sealed class ForwardOnlyStream(byte[] data) : Stream
    {
        private int _position;

        public override bool CanRead => true;

        public override bool CanSeek => false;

        public override bool CanWrite => false;

        public override long Length => throw new NotSupportedException();

        public override long Position { get => throw new NotSupportedException(); set => throw new NotSupportedException(); }

        public override int Read(byte[] buffer, int offset, int count) => Read(buffer.AsSpan(offset, count));

        public override int Read(Span<byte> buffer)
        {
            // Short reads, as a pipe or socket gives them.
            int n = Math.Min(Math.Min(buffer.Length, data.Length - _position), 4093);
            data.AsSpan(_position, n).CopyTo(buffer);
            _position += n;
            return n;
        }

        public override void Flush()
        {
        }

        public override long Seek(long offset, SeekOrigin origin) => throw new NotSupportedException();

        public override void SetLength(long value) => throw new NotSupportedException();

        public override void Write(byte[] buffer, int offset, int count) => throw new NotSupportedException();
    }

    /// <summary>A vector for every id (never zero, so usable under cosine).</summary>
    private sealed class AnyIdSource(int dimension) : IFullVectorSource
    {
        public int Dimension => dimension;

        public bool TryGetVector(long id, Span<float> destination)
        {
            for (int j = 0; j < dimension; j++)
            {
                destination[j] = 1 + ((id + j) & 7);
            }

            return true;
        }
    }
}

/// <summary>A target noticed wrong behaviour that raised no exception of its own (or a resource cap was passed).</summary>
internal sealed class FuzzFindingException(string message) : Exception(message);

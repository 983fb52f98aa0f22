using System.Runtime.InteropServices;
using VectorKit.Distance.Kernels;
using VectorKit.Quantization;

namespace VectorKit.Indexes.InvertedFile;

/// <summary>
/// The inverted file's primary state for persistence (<see cref="InvertedFileIndexParts"/>): exported under the
/// writer gate (every change passes it, so that state is consistent; searches do not), and rebuilt into a working index
/// by <see cref="FromParts"/>, which verifies everything a search relies on and derives slots and the id lookup.
/// </summary>
public sealed partial class InvertedFileIndex
{
    /// <summary>
    /// Runs <paramref name="export"/> on the primary state while holding the writer gate exclusively: searches proceed
    /// (and never queue behind it), changes wait. Ids and list lengths are copies; list codes and full vectors are the
    /// live storage (a mapped index's lists are read in place) and must not be modified.
    /// </summary>
    internal T ExportParts<T>(Func<InvertedFileIndexParts, T> export)
    {
        _writerGate.EnterWriteLock();
        try
        {
            ThrowIfDisposed();
            int lists = _listCounts.Length;
            var ids = new long[_count];
            int[]? order = _full is null ? null : new int[_count];
            int at = 0;
            for (int list = 0; list < lists; list++)
            {
                // Mapped, a slot is the entry's number in list order, which is also its full vector's row.
                int[] slots = _listSlots[list];
                for (int p = 0; p < _listCounts[list]; p++)
                {
                    ids[at] = EntryId(list, slots, p);
                    if (order is not null)
                    {
                        order[at] = _mapped is null ? slots[p] : at;
                    }

                    at++;
                }
            }

            float[]? ranges = _scalar?.ToRanges();

            var parts = new InvertedFileIndexParts
            {
                Dimension = Dimension,
                Metric = Metric,
                Options = _options,
                Trained = _trained,
                Count = _count,
                Centroids = _centroids,
                ProductCodewords = _product?.Codewords.ToArray(),
                FourBitCodewords = _fourBit?.Codewords.ToArray(),
                ProductRotation = _product is { IsRotated: true } ? _product.Rotation.ToArray()
                    : _fourBit is { IsRotated: true } ? _fourBit.Rotation.ToArray() : null,
                ScalarRanges = ranges,
                ListLengths = (int[])_listCounts.Clone(),
                ListCodes = _mapped is null ? _listCodes : [],
                MappedCodes = _mapped,
                ListCodesPacked = _fourBit is not null,
                Ids = ids,
                FullVectors = _full,
                FullRowOrder = order,
            };
            return export(parts);
        }
        finally
        {
            _writerGate.ExitWriteLock();
        }
    }

    /// <summary>
    /// Builds a working index from loaded primary state, taking ownership of its arrays and of the full-vector buffer
    /// (disposed on failure). Verifies first: the options fit the dimension; an untrained index holds nothing; a
    /// trained one has <c>ListCount × Dimension</c> finite centroids and, under compressed storage, finite codebooks
    /// or usable scalar ranges; one length per list, none negative, summing to the count; each list's codes exactly
    /// <c>length × code bytes</c>; float32 entries finite; 8-bit codes with zero padding; ids unique; full vectors
    /// present exactly when the options keep them. (The reader has already checked full vectors for finiteness.)
    /// </summary>
    /// <exception cref="InvalidDataException">The state violates an invariant; the message says which and where.</exception>
    internal static InvertedFileIndex FromParts(InvertedFileIndexParts parts)
    {
        InvertedFileIndex index;
        try
        {
            index = new InvertedFileIndex(parts.Dimension, parts.Metric, parts.Options, KernelDispatch.Widest, parts.FullVectors);
        }
        catch (ArgumentException e)
        {
            parts.FullVectors?.Dispose();
            throw new InvalidDataException($"the options do not fit the index: {e.Message}", e);
        }

        try
        {
            index.Restore(parts);
            return index;
        }
        catch
        {
            index.Dispose();
            throw;
        }
    }

    private void Restore(InvertedFileIndexParts parts)
    {
        int lists = _options.ListCount;
        int count = parts.Count;
        bool keepsFull = _options.KeepsFullVectorsInMemory;
        if ((parts.FullVectors is not null) != keepsFull)
        {
            throw new InvalidDataException(keepsFull
                ? "the options keep full vectors for re-scoring, but none are stored"
                : "full vectors are stored, but the options do not keep them");
        }

        if (parts.FullVectors is not null && parts.FullVectors.Capacity < count)
        {
            throw new InvalidDataException($"{parts.FullVectors.Capacity} full vectors are stored for {count} entries");
        }

        if (parts.ListLengths.Length != lists || parts.ListCodes.Length != lists)
        {
            throw new InvalidDataException($"{parts.ListLengths.Length} list lengths are stored; the options declare {lists} lists");
        }

        if (!parts.Trained)
        {
            if (count != 0 || parts.Centroids.Length != 0 || parts.ProductCodewords is not null || parts.FourBitCodewords is not null || parts.ProductRotation is not null || parts.ScalarRanges is not null)
            {
                throw new InvalidDataException($"an untrained index holds no centroids, quantizer or vectors, but this one declares {count} vectors and {parts.Centroids.Length} centroid components");
            }
        }
        else
        {
            RestoreTraining(parts);
        }

        if (parts.Ids.Length != count)
        {
            throw new InvalidDataException($"{parts.Ids.Length} ids are stored for {count} entries");
        }

        long total = 0;
        for (int list = 0; list < lists; list++)
        {
            int length = parts.ListLengths[list];
            if (length < 0)
            {
                throw new InvalidDataException($"list {list} has length {length}");
            }

            total += length;
            long needed = parts.ListCodesPacked ? ListCodeBytes(length) : (long)length * _codeBytes;
            if (parts.ListCodesPacked && _fourBit is null)
            {
                throw new InvalidDataException("fast-scan blocks are stored, but the options do not use the fast-scan layout");
            }

            if (parts.ListCodes[list].Length != needed)
            {
                throw new InvalidDataException($"list {list} holds {parts.ListCodes[list].Length} code bytes; its {length} entries of {_codeBytes} bytes need {needed}");
            }
        }

        if (total != count)
        {
            throw new InvalidDataException($"the list lengths add up to {total}, but the index declares {count} vectors");
        }

        for (int list = 0; list < lists; list++)
        {
            CheckCodes(list, parts.ListCodes[list], parts.ListLengths[list]);
        }

        _ids = parts.Ids;
        _listOf = new int[count];
        _positionOf = new int[count];
        _slotOf.EnsureCapacity(count);
        int slot = 0;
        for (int list = 0; list < lists; list++)
        {
            int length = parts.ListLengths[list];
            var slots = new int[length];
            for (int p = 0; p < length; p++, slot++)
            {
                long id = _ids[slot];
                if (!_slotOf.TryAdd(id, slot))
                {
                    throw new InvalidDataException($"id {id} is stored twice (entries {_slotOf[id]} and {slot} in list order)");
                }

                slots[p] = slot;
                _listOf[slot] = list;
                _positionOf[slot] = p;
            }

            _listSlots[list] = slots;
            _listCodes[list] = _fourBit is null || parts.ListCodesPacked ? parts.ListCodes[list] : Packed(parts.ListCodes[list], length);
            _listCounts[list] = length;
        }

        _count = count;
    }

    private void RestoreTraining(InvertedFileIndexParts parts)
    {
        int d = Dimension;
        int lists = _options.ListCount;
        if (parts.Centroids.Length != (long)lists * d)
        {
            throw new InvalidDataException($"{parts.Centroids.Length} centroid components are stored; {lists} lists of dimension {d} need {(long)lists * d}");
        }

        for (int i = 0; i < parts.Centroids.Length; i++)
        {
            if (!float.IsFinite(parts.Centroids[i]))
            {
                throw new InvalidDataException($"centroid {i / d}, component {i % d} is {Invariant(parts.Centroids[i])}; centroids must be finite");
            }
        }

        bool fourBit = _options.UsesFastScan;
        bool product = _options.Encoding == VectorEncoding.ProductCodes && !fourBit;
        bool scalar = _options.Encoding == VectorEncoding.Scalar8Bit;
        if ((parts.ProductCodewords is not null) != product || (parts.ScalarRanges is not null) != scalar || (parts.FourBitCodewords is not null) != fourBit)
        {
            throw new InvalidDataException($"the stored quantizer does not match the list storage {_options.Encoding}");
        }

        bool rotated = (product || fourBit) && _options.ProductCodeRotation != SubspaceRotation.None;
        if ((parts.ProductRotation is not null) != rotated)
        {
            throw new InvalidDataException(rotated
                ? $"the options rotate product codes ({_options.ProductCodeRotation}), but no rotation is stored"
                : "a product-code rotation is stored, but the options do not rotate");
        }

        if (product)
        {
            _product = ProductQuantizer.FromCodewords(parts.ProductCodewords!, d, _options.ProductCodeBytes, parts.ProductRotation);
            _rotatedCentroids = RotatedCentroids(parts.Centroids, _product, null);
        }
        else if (fourBit)
        {
            _fourBit = FourBitQuantizer.FromCodewords(parts.FourBitCodewords!, d, _options.ProductCodeBytes, parts.ProductRotation);
            _rotatedCentroids = RotatedCentroids(parts.Centroids, null, _fourBit);
            _listTerms = ListTerms(parts.Centroids, _rotatedCentroids, _fourBit);
        }
        else if (scalar)
        {
            float[] ranges = parts.ScalarRanges!;
            if (ranges.Length != 2 * d)
            {
                throw new InvalidDataException($"{ranges.Length} scalar range values are stored; dimension {d} needs {2 * d}");
            }

            _scalar = ScalarQuantizer.FromRanges(ranges.AsSpan(0, d), ranges.AsSpan(d, d), d);
        }

        _centroids = parts.Centroids;
        _trained = true;
    }

    // What a scan relies on beyond the lengths: float32 entries are finite; 8-bit codes keep the encoder's zero padding.
    private void CheckCodes(int list, ReadOnlySpan<byte> codes, int length)
    {
        if (_options.Encoding == VectorEncoding.Float32)
        {
            ReadOnlySpan<float> values = MemoryMarshal.Cast<byte, float>(codes);
            for (int i = 0; i < values.Length; i++)
            {
                if (!float.IsFinite(values[i]))
                {
                    throw new InvalidDataException($"list {list}, entry {i / Dimension}, component {i % Dimension} is {Invariant(values[i])}; vectors must be finite");
                }
            }
        }
        else if (_options.Encoding == VectorEncoding.Scalar8Bit && _codeBytes > Dimension)
        {
            for (int p = 0; p < length; p++)
            {
                if (codes.Slice((p * _codeBytes) + Dimension, _codeBytes - Dimension).IndexOfAnyExcept((byte)0) >= 0)
                {
                    throw new InvalidDataException($"list {list}, entry {p} has non-zero padding after its {Dimension} code bytes");
                }
            }
        }
    }

    // Codes one after another into fast-scan blocks (padding slots zero).
    private byte[] Packed(byte[] codes, int length)
    {
        var blocks = new byte[checked((int)ListCodeBytes(length))];
        for (int p = 0; p < length; p++)
        {
            FastScanKernel.Put(blocks, _codeBytes, p, codes.AsSpan(p * _codeBytes, _codeBytes));
        }

        return blocks;
    }

    private static string Invariant(float value) => value.ToString(System.Globalization.CultureInfo.InvariantCulture);
}

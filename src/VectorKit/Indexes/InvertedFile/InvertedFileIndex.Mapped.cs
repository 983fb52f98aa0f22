using VectorKit.Distance.Kernels;
using VectorKit.Internal;

namespace VectorKit.Indexes.InvertedFile;

/// <summary>An inverted file read in place from a mapped file (opened with <c>IndexFile.OpenMapped</c>).</summary>
public sealed partial class InvertedFileIndex
{
    // The mapped file whose pages hold the lists, ids and full vectors (null in memory); owned, unmapped on Dispose
    // after the buffers have let go of it. With it, _mapped replaces the per-list arrays and the per-slot columns:
    // a slot is an entry's number in list order.
    private IDisposable? _mapping;
    private MappedLists? _mapped;

    /// <summary>
    /// Whether the index reads a mapped file in place (opened with <c>IndexFile.OpenMapped</c>): searches and reads
    /// only; adds, replaces, removals, training and <see cref="Compact"/> throw <see cref="NotSupportedException"/>.
    /// </summary>
    public bool IsMapped => Volatile.Read(ref _mapping) is not null;

    /// <inheritdoc/>
    private protected override bool IsReadOnly => IsMapped;

    /// <summary>
    /// Builds a read-only index over a mapped file's lists, taking ownership of <paramref name="mapping"/> and
    /// <paramref name="full"/> (disposed on failure, or with the index). <paramref name="training"/> carries the
    /// options, the trained state (checked as a load checks it) and the list lengths; its codes and ids are unused.
    /// With <paramref name="verify"/> every list's codes are checked as a load checks them (finite float32 entries,
    /// zero 8-bit padding).
    /// </summary>
    /// <exception cref="InvalidDataException">The trained state or the lists violate an invariant.</exception>
    internal static unsafe InvertedFileIndex FromMapped(IDisposable mapping, InvertedFileIndexParts training, byte* codes, long* ids, VectorBuffer? full, IdMap slotOf, bool verify, CancellationToken cancellationToken)
    {
        InvertedFileIndex index;
        try
        {
            index = new InvertedFileIndex(training.Dimension, training.Metric, training.Options, KernelDispatch.Widest, full);
        }
        catch (ArgumentException e)
        {
            full?.Dispose();
            mapping.Dispose();
            throw new InvalidDataException($"the options do not fit the index: {e.Message}", e);
        }

        index._mapping = mapping;
        try
        {
            index.RestoreMapped(training, codes, ids, slotOf, verify, cancellationToken);
            return index;
        }
        catch
        {
            index.Dispose();
            throw;
        }
    }

    private unsafe void RestoreMapped(InvertedFileIndexParts parts, byte* codes, long* ids, IdMap slotOf, bool verify, CancellationToken cancellationToken)
    {
        int lists = _options.ListCount;
        int count = parts.Count;
        if ((_full is not null) != _options.KeepsFullVectorsInMemory)
        {
            throw new InvalidDataException("the stored full vectors do not match the options");
        }

        if (parts.ListLengths.Length != lists)
        {
            throw new InvalidDataException($"{parts.ListLengths.Length} list lengths are stored; the options declare {lists} lists");
        }

        if (!parts.Trained)
        {
            if (count != 0)
            {
                throw new InvalidDataException($"an untrained index holds no vectors, but this one declares {count}");
            }
        }
        else
        {
            RestoreTraining(parts);
        }

        long total = 0;
        foreach (int length in parts.ListLengths)
        {
            if (length < 0 || ListCodeBytes(length) > Array.MaxLength)
            {
                throw new InvalidDataException($"a list has length {length}; a list holds 0 to {Array.MaxLength / _codeBytes} entries");
            }

            total += length;
        }

        if (total != count)
        {
            throw new InvalidDataException($"the list lengths add up to {total}, but the index declares {count} vectors");
        }

        var mapped = new MappedLists(codes, ids, parts.ListLengths, ListCodeBytes);
        for (int list = 0; verify && list < lists; list++)
        {
            cancellationToken.ThrowIfCancellationRequested();
            if (_fourBit is null)
            {
                CheckCodes(list, mapped.Codes(list), parts.ListLengths[list]);
            }
        }

        parts.ListLengths.CopyTo(_listCounts, 0);
        _mapped = mapped;
        _slotOf = slotOf;
        _count = count;
    }

    // A list's codes: the array in memory (at its capacity), or the mapped bytes.
    private ReadOnlySpan<byte> ListCodes(int list) => _mapped is null ? _listCodes[list] : _mapped.Codes(list);

    // The id of a list's entry; `slots` is the list's slot array in memory (empty when mapped).
    private long EntryId(int list, int[] slots, int position) => _mapped is null ? _ids[slots[position]] : _mapped.Id(list, position);

    // A slot's list and position in it.
    private (int List, int Position) Locate(int slot) => _mapped is null ? (_listOf[slot], _positionOf[slot]) : _mapped.Locate(slot);
}

using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Persistence;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>
/// The read-only contract of a variant, run on its index saved and opened mapped
/// (<see cref="IndexFile.OpenMapped(string, MappedOpenOptions?, CancellationToken)"/>, with verification): the variant
/// <typeparamref name="TVariant"/> builds and fills the index in memory as in its own suite, and every expectation (exactness,
/// recall floor, distances, decoded vectors, code bytes) is the variant's own. The mapped index attaches the variant's
/// external source when it re-scores from one, as after a load.
/// </summary>
/// <typeparam name="TVariant">The variant whose index is mapped.</typeparam>
public abstract class MappedContract<TVariant> : SearchContractTests
    where TVariant : IndexContractTests, new()
{
    private readonly TVariant _variant = new();

    protected override bool IsExact => _variant.Facts.IsExact;

    protected override double RecallFloor => _variant.Facts.RecallFloor;

    protected override bool ReportsExactDistances => _variant.Facts.ReportsExactDistances;

    protected override bool DecodesStoredVectors => _variant.Facts.DecodesStoredVectors;

    protected override SearchOptions WideSearch => _variant.Facts.WideSearch;

    // The rows are the file's pages: the process holds only the small tables.
    private protected override bool? CountsStoredRows => false;

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        using IVectorIndex built = _variant.NewIndex(dimension, metric);
        return Map(built);
    }

    private protected override IVectorIndex Build(int dimension, DistanceMetric metric, long[] ids, float[] data)
    {
        using IVectorIndex built = _variant.NewIndex(dimension, metric, ids, data);
        return Map(built);
    }

    protected override int ExpectedCodeBytes(int dimension) => _variant.CodeBytesOf(dimension);

    private protected override void AssertDecoded(IVectorIndex index, double[] encoded, float[] decoded) => _variant.CheckDecoded(index, encoded, decoded);

    private protected override void AssertOptions(IVectorIndex index) => ReopenedIndex.AssertSameSettings(_variant.LastGivenOptions!, index.Options);

    private IVectorIndex Map(IVectorIndex built)
    {
        IVectorIndex mapped = ReopenedIndex.SaveAndOpen(built, path => IndexFile.OpenMapped(path, MappedOpenOptions.Untrusted));

        Assert.True(mapped is VectorIndex index && IsMapped(index), $"{mapped.GetType().Name} did not open mapped");
        if (mapped.Options.ReadsFullVectorsExternally && _variant.ExistingSource(built.Dimension) is IFullVectorSource source)
        {
            ((IExternalFullVectors)mapped).AttachFullVectors(source);
        }

        return mapped;
    }

    private static bool IsMapped(VectorIndex index) => index switch
    {
        VectorKit.Indexes.Exact.ExactIndex exact => exact.IsMapped,
        VectorKit.Indexes.Graph.GraphIndex graph => graph.IsMapped,
        VectorKit.Indexes.InvertedFile.InvertedFileIndex lists => lists.IsMapped,
        _ => false,
    };
}

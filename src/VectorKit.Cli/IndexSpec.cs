using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.Indexes.Graph;
using VectorKit.Indexes.InvertedFile;

namespace VectorKit.Cli;

/// <summary>The index kinds the tool builds, by their command-line names.</summary>
internal enum IndexKindName
{
    Exact,
    Graph,
    InvertedFile,
}

/// <summary>What <c>build</c> creates: kind, storage variant, metric and the kind's settings (null = the library's default).</summary>
internal sealed record IndexSpec(
    IndexKindName Kind,
    VectorEncoding Storage,
    DistanceMetric Metric,
    int? LinksPerNode = null,
    int? BuildWidth = null,
    int? SearchWidth = null,
    int? Lists = null,
    int? CodeBytes = null,
    int? RescoreDepth = null,
    int? Seed = null,
    bool ExternalFullVectors = false)
{
    /// <summary>Whether the index must be trained on a sample before items are added.</summary>
    public bool NeedsTraining => Kind == IndexKindName.InvertedFile || Storage != VectorEncoding.Float32;

    public static IndexKindName ParseKind(string text) => text switch
    {
        "exact" => IndexKindName.Exact,
        "graph" => IndexKindName.Graph,
        "inverted-file" => IndexKindName.InvertedFile,
        _ => throw new UsageException($"--kind is '{text}'; expected exact, graph or inverted-file"),
    };

    public static VectorEncoding ParseStorage(string text) => text switch
    {
        "float32" => VectorEncoding.Float32,
        "8bit" => VectorEncoding.Scalar8Bit,
        "product-codes" => VectorEncoding.ProductCodes,
        _ => throw new UsageException($"--storage is '{text}'; expected float32, 8bit or product-codes"),
    };

    public static DistanceMetric ParseMetric(string text) => text switch
    {
        "squared-euclidean" or "l2" => DistanceMetric.SquaredEuclidean,
        "inner-product" => DistanceMetric.InnerProduct,
        "cosine" => DistanceMetric.Cosine,
        _ => throw new UsageException($"--metric is '{text}'; expected squared-euclidean, inner-product or cosine"),
    };

    public static string StorageName(VectorEncoding encoding) => encoding switch
    {
        VectorEncoding.Scalar8Bit => "8bit",
        VectorEncoding.ProductCodes => "product-codes",
        _ => "float32",
    };

    public static string KindName(IVectorIndex index) => index switch
    {
        GraphIndex => "graph",
        InvertedFileIndex => "inverted-file",
        _ => "exact",
    };

    public static VectorEncoding StorageOf(IVectorIndex index) => index.Options.Encoding;

    /// <summary>A short label for plots and reports: kind and storage variant.</summary>
    public static string Label(IVectorIndex index) => $"{KindName(index)}, {StorageName(StorageOf(index))}";

    /// <summary>Creates the empty index; the library validates every setting (an invalid one becomes a usage error).</summary>
    public VectorIndex Create(int dimension, IFullVectorSource? fullVectors = null)
    {
        FullVectorLocation location = ExternalFullVectors ? FullVectorLocation.ExternalSource : FullVectorLocation.InIndexMemory;
        try
        {
            if (fullVectors is not null)
            {
                return Kind switch
                {
                    IndexKindName.Exact => new ExactIndex(dimension, Metric, new ExactIndexOptions { Encoding = Storage, FullVectors = location, RescoreDepth = RescoreDepth ?? ExactIndexOptions.Default.RescoreDepth }, fullVectors),
                    IndexKindName.Graph => new GraphIndex(dimension, Metric, new GraphIndexOptions
                    {
                        Encoding = Storage,
                        FullVectors = location,
                        RescoreDepth = RescoreDepth ?? GraphIndexOptions.Default.RescoreDepth,
                        LinksPerNode = LinksPerNode ?? GraphIndexOptions.Default.LinksPerNode,
                        BuildWidth = BuildWidth ?? GraphIndexOptions.Default.BuildWidth,
                        SearchWidth = SearchWidth ?? GraphIndexOptions.Default.SearchWidth,
                        Seed = Seed ?? GraphIndexOptions.Default.Seed,
                    }, fullVectors),
                    _ => new InvertedFileIndex(dimension, Metric, new InvertedFileOptions
                    {
                        Encoding = Storage,
                        FullVectors = location,
                        RescoreDepth = RescoreDepth ?? InvertedFileOptions.Default.RescoreDepth,
                        ListCount = Lists ?? InvertedFileOptions.Default.ListCount,
                        ProductCodeBytes = CodeBytes ?? InvertedFileOptions.Default.ProductCodeBytes,
                        SearchWidth = SearchWidth ?? InvertedFileOptions.Default.SearchWidth,
                        Seed = Seed ?? InvertedFileOptions.Default.Seed,
                    }, fullVectors),
                };
            }

            return Kind switch
            {
                IndexKindName.Exact => new ExactIndex(dimension, Metric, new ExactIndexOptions
                {
                    Encoding = Storage,
                    RescoreDepth = RescoreDepth ?? ExactIndexOptions.Default.RescoreDepth,
                }),
                IndexKindName.Graph => new GraphIndex(dimension, Metric, new GraphIndexOptions
                {
                    Encoding = Storage,
                    RescoreDepth = RescoreDepth ?? GraphIndexOptions.Default.RescoreDepth,
                    LinksPerNode = LinksPerNode ?? GraphIndexOptions.Default.LinksPerNode,
                    BuildWidth = BuildWidth ?? GraphIndexOptions.Default.BuildWidth,
                    SearchWidth = SearchWidth ?? GraphIndexOptions.Default.SearchWidth,
                    Seed = Seed ?? GraphIndexOptions.Default.Seed,
                }),
                _ => new InvertedFileIndex(dimension, Metric, new InvertedFileOptions
                {
                    Encoding = Storage,
                    RescoreDepth = RescoreDepth ?? InvertedFileOptions.Default.RescoreDepth,
                    ListCount = Lists ?? InvertedFileOptions.Default.ListCount,
                    ProductCodeBytes = CodeBytes ?? InvertedFileOptions.Default.ProductCodeBytes,
                    SearchWidth = SearchWidth ?? InvertedFileOptions.Default.SearchWidth,
                    Seed = Seed ?? InvertedFileOptions.Default.Seed,
                }),
            };
        }
        catch (ArgumentException e)
        {
            throw new UsageException(e.Message);
        }
    }
}

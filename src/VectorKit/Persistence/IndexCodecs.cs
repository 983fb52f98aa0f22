using VectorKit.Indexes;

namespace VectorKit.Persistence;

/// <summary>The registered codecs, one per index kind.</summary>
internal static class IndexCodecs
{
    private static readonly IndexCodec[] All = [new ExactIndexCodec(), new GraphIndexCodec(), new InvertedFileIndexCodec()];

    public static IndexCodec? ForKind(IndexKind kind)
    {
        foreach (IndexCodec codec in All)
        {
            if (codec.Kind == kind)
            {
                return codec;
            }
        }

        return null;
    }

    public static IndexCodec? ForIndex(IVectorIndex index)
    {
        foreach (IndexCodec codec in All)
        {
            if (codec.IndexType == index.GetType())
            {
                return codec;
            }
        }

        return null;
    }

    public static string SupportedTypes => string.Join(", ", All.Select(c => c.IndexType.Name));
}

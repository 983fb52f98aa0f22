using VectorKit.Indexes;

namespace VectorKit.Persistence;

/// <summary>
/// The tuned search defaults in the header (format version 2): <c>tuned-k</c> marks them present, with
/// <c>tuned-target-recall</c>, <c>changes-since-tuning</c>, and <c>tuned-search-width</c> / <c>tuned-rescore-depth</c>
/// when set. An index without tuned defaults writes none of them and keeps version 1, so its file is byte for byte what
/// the previous library wrote and still loads there.
/// </summary>
internal static class TuningFields
{
    private const string K = "tuned-k";
    private const string Target = "tuned-target-recall";
    private const string Width = "tuned-search-width";
    private const string Depth = "tuned-rescore-depth";
    private const string Changes = "changes-since-tuning";

    /// <summary>The version a file needs: 2 with tuned defaults, else 1.</summary>
    public static uint VersionFor(IndexHeader header) => header.Integers.ContainsKey(K) ? 2u : 1u;

    /// <summary>Adds the index's tuned defaults, if any, to the header.</summary>
    public static void Write(IndexHeader header, VectorIndex? index)
    {
        if (index?.TunedDefaults is not { } tuned)
        {
            return;
        }

        header.Integers[K] = tuned.K;
        header.Reals[Target] = tuned.TargetRecall;
        header.Integers[Changes] = index.ChangesSinceTuning;
        if (tuned.SearchWidth is { } width)
        {
            header.Integers[Width] = width;
        }

        if (tuned.RescoreDepth is { } depth)
        {
            header.Integers[Depth] = depth;
        }
    }

    /// <summary>Restores tuned defaults from a version 2 header onto the loaded index (a version 1 file has none).</summary>
    public static void Read(IndexHeader header, IVectorIndex index)
    {
        if (header.FormatVersion < 2 || !header.Integers.ContainsKey(K) || index is not VectorIndex vectorIndex)
        {
            return;
        }

        int k = (int)header.Integer(K, 1, TunedSearchDefaults.MaxK);
        double target = header.Real(Target, double.Epsilon, 1);
        long changes = header.Integer(Changes, 0, long.MaxValue);
        int? width = header.Integers.ContainsKey(Width) ? (int)header.Integer(Width, 1, TunedSearchDefaults.MaxSearchWidth) : null;
        int? depth = header.Integers.ContainsKey(Depth) ? (int)header.Integer(Depth, 0, VectorIndexOptions.MaxRescoreDepth) : null;
        try
        {
            vectorIndex.RestoreTuning(new TunedSearchDefaults(width, depth, target, k), changes);
        }
        catch (ArgumentException e)
        {
            throw IndexHeader.Malformed($"the tuned search defaults do not fit the index: {e.Message}");
        }
    }
}

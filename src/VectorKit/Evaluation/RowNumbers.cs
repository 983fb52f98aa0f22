namespace VectorKit.Evaluation;

/// <summary>The default ids of a data set given without ids: its row numbers.</summary>
internal static class RowNumbers
{
    /// <summary>The ids 0, 1, …, <paramref name="count"/> − 1.</summary>
    public static long[] Upto(int count)
    {
        var ids = new long[count];
        for (int i = 0; i < count; i++)
        {
            ids[i] = i;
        }

        return ids;
    }
}

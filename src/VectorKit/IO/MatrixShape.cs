namespace VectorKit.IO;

/// <summary>Shape checks shared by <see cref="VectorSet"/>, <see cref="IntVectorSet"/> and the writers.</summary>
internal static class MatrixShape
{
    /// <summary>Returns count × dimension, validated to fit one array.</summary>
    public static int CheckedLength(int count, int dimension)
    {
        if (count < 0)
        {
            DataFormatThrow.ArgumentOutOfRange(nameof(count), count, "must not be negative");
        }

        CheckDimension(dimension, count == 0);
        long length = (long)count * dimension;
        if (length > Array.MaxLength)
        {
            DataFormatThrow.ArgumentOutOfRange(nameof(count), count, $"times dimension {dimension} must not exceed {Array.MaxLength} values");
        }

        return (int)length;
    }

    /// <summary>Returns the number of rows in a flat array, which must hold whole rows.</summary>
    public static int RowCount(int length, int dimension, string paramName)
    {
        CheckDimension(dimension, length == 0);
        if (dimension == 0)
        {
            return 0;
        }

        if (length % dimension != 0)
        {
            DataFormatThrow.NotMultipleOfDimension(paramName, length, dimension);
        }

        return length / dimension;
    }

    private static void CheckDimension(int dimension, bool empty)
    {
        // Dimension 0 describes only an empty set read from a file that cannot name its dimension.
        if (dimension < 0 || (dimension == 0 && !empty))
        {
            DataFormatThrow.ArgumentOutOfRange(nameof(dimension), dimension, empty ? "must not be negative" : "must be at least 1");
        }
    }
}

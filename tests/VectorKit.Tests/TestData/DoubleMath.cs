namespace VectorKit.Tests.TestData;

/// <summary>Double-precision reference sums, the independent oracle for float kernels and quantizers.</summary>
internal static class DoubleMath
{
    public static double SquaredEuclidean(ReadOnlySpan<float> a, ReadOnlySpan<float> b)
    {
        double sum = 0;
        for (int i = 0; i < a.Length; i++)
        {
            double difference = (double)a[i] - b[i];
            sum += difference * difference;
        }

        return sum;
    }

    public static double Dot(ReadOnlySpan<float> a, ReadOnlySpan<float> b)
    {
        double sum = 0;
        for (int i = 0; i < a.Length; i++)
        {
            sum += (double)a[i] * b[i];
        }

        return sum;
    }
}

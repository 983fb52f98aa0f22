using VectorKit.Distance;
using VectorKit.Distance.Kernels;
using static VectorKit.Tests.Distance.KernelOracle;

namespace VectorKit.Tests.Distance;

/// <summary>The pair kernels (dot, squared L2, fused cosine) on every kernel path, against a double-precision reference.</summary>
[Trait("Category", "Kernels")]
public class PairKernelTests
{
    [Theory]
    [MemberData(nameof(Dimensions), MemberType = typeof(KernelOracle))]
    public void EveryPathMatchesTheReference(int n) => CheckAllPaths(n, seed: n);

    // Cheaper: every length across the 1-, 4-, 8- and 16-float lanes and their 4× unroll, and the edges near 512.
    [Fact]
    public void LengthSweepMatchesTheReference()
    {
        for (int n = 0; n <= 260; n++)
        {
            CheckAllPaths(n, seed: 1000 + n);
        }

        for (int n = 511; n <= 520; n++)
        {
            CheckAllPaths(n, seed: 1000 + n);
        }
    }

    [Theory]
    [MemberData(nameof(Dimensions), MemberType = typeof(KernelOracle))]
    public void MisalignedBuffersGiveBitIdenticalResults(int n)
    {
        float[] x = Random(n, seed: 2 * n);
        float[] y = Random(n, seed: (2 * n) + 1);
        var xBuffer = new float[n + 16];
        var yBuffer = new float[n + 16];
        foreach (KernelPath path in Paths())
        {
            float dot = VectorDistance.Dot(path, x, y);
            float squared = VectorDistance.SquaredEuclidean(path, x, y);
            float cosine = VectorDistance.CosineSimilarity(path, x, y);

            // Offsets 1..15 floats move each start through every 4-byte position within a 64-byte line; the two
            // buffers are offset differently so their relative alignment changes too.
            for (int offset = 1; offset < 16; offset++)
            {
                ReadOnlySpan<float> xs = Place(x, xBuffer, offset);
                ReadOnlySpan<float> ys = Place(y, yBuffer, 16 - offset);
                string context = $"{path}, n = {n}, offsets {offset} and {16 - offset}";
                AssertBitIdentical(dot, VectorDistance.Dot(path, xs, ys), $"Dot {context}");
                AssertBitIdentical(squared, VectorDistance.SquaredEuclidean(path, xs, ys), $"SquaredEuclidean {context}");
                AssertBitIdentical(cosine, VectorDistance.CosineSimilarity(path, xs, ys), $"Cosine {context}");
            }
        }
    }

    [Fact]
    public void PublicMembersRunTheWidestPath()
    {
        float[] x = Random(777, seed: 5);
        float[] y = Random(777, seed: 6);
        AssertBitIdentical(VectorDistance.Dot(KernelDispatch.Widest, x, y), VectorDistance.Dot(x, y), "Dot");
        AssertBitIdentical(VectorDistance.SquaredEuclidean(KernelDispatch.Widest, x, y), VectorDistance.SquaredEuclidean(x, y), "SquaredEuclidean");
        AssertBitIdentical(VectorDistance.CosineSimilarity(KernelDispatch.Widest, x, y), VectorDistance.CosineSimilarity(x, y), "Cosine");
        AssertBitIdentical(-VectorDistance.Dot(x, y), VectorDistance.Compute(DistanceMetric.InnerProduct, x, y), "Compute InnerProduct");
        AssertBitIdentical(VectorDistance.SquaredEuclidean(x, y), VectorDistance.Compute(DistanceMetric.SquaredEuclidean, x, y), "Compute SquaredEuclidean");
        AssertBitIdentical(1f - VectorDistance.CosineSimilarity(x, y), VectorDistance.Compute(DistanceMetric.Cosine, x, y), "Compute Cosine");
    }

    [Fact]
    public void EmptyVectorsGiveZeroAndCosineNaN()
    {
        foreach (KernelPath path in Paths())
        {
            Assert.Equal(0f, VectorDistance.Dot(path, [], []));
            Assert.Equal(0f, VectorDistance.SquaredEuclidean(path, [], []));
            Assert.True(float.IsNaN(VectorDistance.CosineSimilarity(path, [], [])));
        }
    }

    private static void CheckAllPaths(int n, int seed)
    {
        float[] x = Random(n, seed);
        float[] y = Random(n, seed + 1_000_000);
        double dot = KernelOracle.Dot(x, y);
        double squared = KernelOracle.SquaredEuclidean(x, y);
        double cosine = n == 0 ? double.NaN : KernelOracle.CosineSimilarity(x, y);
        foreach (KernelPath path in Paths())
        {
            AssertDot(dot, VectorDistance.Dot(path, x, y), x, y, $"Dot {path}, n = {n}");
            AssertSquaredEuclidean(squared, VectorDistance.SquaredEuclidean(path, x, y), n, $"SquaredEuclidean {path}, n = {n}");
            if (n > 0)
            {
                AssertCosine(cosine, VectorDistance.CosineSimilarity(path, x, y), n, $"Cosine {path}, n = {n}");
            }
        }
    }

    private static ReadOnlySpan<float> Place(float[] values, float[] buffer, int offset)
    {
        Array.Fill(buffer, float.NaN);
        values.CopyTo(buffer, offset);
        return buffer.AsSpan(offset, values.Length);
    }
}

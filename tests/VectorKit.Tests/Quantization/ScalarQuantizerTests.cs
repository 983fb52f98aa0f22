using VectorKit.Distance.Kernels;
using VectorKit.Quantization;
using VectorKit.Tests.Distance;
using VectorKit.Tests.TestData;
using static VectorKit.Tests.Distance.KernelOracle;

namespace VectorKit.Tests.Quantization;

/// <summary>
/// The 8-bit scalar quantizer and its SIMD byte kernel on every kernel path, against a double-precision reference
/// (the decoded value <c>minimum + step·code</c> and the sums taken in double).
/// </summary>
[Trait("Category", "Kernels")]
public class ScalarQuantizerTests
{
    [Theory]
    [MemberData(nameof(Dimensions), MemberType = typeof(KernelOracle))]
    public void KernelOnEveryPath_MatchesTheDoubleReference(int d) => CheckAllPaths(d, seed: d);

    [Fact]
    public void LengthSweep_AcrossEveryLaneWidthAndThePadding()
    {
        for (int d = 1; d <= 70; d++)
        {
            CheckAllPaths(d, seed: 500 + d);
        }
    }

    [Fact]
    public void TheWidestPathRuns_WhereTheTestScriptExpectsIt()
    {
        // The test script re-runs these tests with wider instruction sets switched off and names the path it expects.
        string? expected = Environment.GetEnvironmentVariable("VECTORKIT_EXPECT_PATH");
        if (expected is not null)
        {
            Assert.Equal(expected, KernelDispatch.Widest.ToString());
        }

        Assert.Contains(KernelDispatch.Widest, Paths());
    }

    private static void CheckAllPaths(int d, int seed)
    {
        float[] training = Random(40 * d, seed);
        for (int i = 0; i < training.Length; i++)
        {
            training[i] *= 3;
        }

        ScalarQuantizer quantizer = ScalarQuantizer.Train(training, d);
        Assert.Equal((d + 15) / 16 * 16, quantizer.CodeBytes);
        float[] query = Random(d, seed + 1);
        var code = new byte[quantizer.CodeBytes];
        var decoded = new float[d];
        for (int row = 0; row < 5; row++)
        {
            quantizer.Encode(training.AsSpan(row * d, d), code);
            Assert.True(code.AsSpan(d).IndexOfAnyExcept((byte)0) < 0, "padding bytes must be zero");

            // Reference: decode in double, sum in double.
            double squared = 0, dot = 0, squaredTerms = 0, dotTerms = 0;
            for (int j = 0; j < d; j++)
            {
                double x = quantizer.Minimums[j] + ((double)quantizer.Steps[j] * code[j]);
                double difference = query[j] - x;
                squared += difference * difference;
                dot += query[j] * x;
                squaredTerms += (Math.Abs(query[j]) + Math.Abs(x)) * (Math.Abs(query[j]) + Math.Abs(x));
                dotTerms += Math.Abs(query[j] * x);
            }

            // The float kernel rounds the decoded value once (an FMA) and then sums as the float kernels do: the
            // float32 summation bound of KernelOracle with two more roundings per term.
            double squaredTolerance = Safety * (d + 4) * Unit * squaredTerms;
            double dotTolerance = Safety * (d + 4) * Unit * dotTerms;
            foreach (KernelPath path in Paths())
            {
                Assert.Equal(squared, quantizer.Single<SquaredDifferenceStep>(query, code, path), squaredTolerance);
                Assert.Equal(dot, quantizer.Single<DotStep>(query, code, path), dotTolerance);
            }

            Assert.Equal(squared, quantizer.SquaredDistance(query, code), squaredTolerance);
            Assert.Equal(dot, quantizer.Dot(query, code), dotTolerance);
            quantizer.Decode(code, decoded);
            Assert.Equal(squared, DoubleMath.SquaredEuclidean(query, decoded), squaredTolerance);
        }
    }

    [Fact]
    public void Encoding_ErrsByAtMostHalfAStep_AndClampsOutOfRangeValues()
    {
        const int D = 37;
        float[] training = Random(200 * D, seed: 3);
        ScalarQuantizer quantizer = ScalarQuantizer.Train(training, D);
        var code = new byte[quantizer.CodeBytes];
        var decoded = new float[D];
        for (int row = 0; row < 200; row++)
        {
            ReadOnlySpan<float> vector = training.AsSpan(row * D, D);
            quantizer.Encode(vector, code);
            quantizer.Decode(code, decoded);
            for (int j = 0; j < D; j++)
            {
                Assert.True(Math.Abs(decoded[j] - vector[j]) <= (quantizer.Steps[j] * 0.5) + 1e-6, $"row {row}, component {j}");
            }
        }

        float[] outside = Enumerable.Repeat(100f, D).ToArray();
        outside[0] = -100f;
        quantizer.Encode(outside, code);
        Assert.Equal(0, code[0]);
        Assert.All(code.AsSpan(1, D - 1).ToArray(), c => Assert.Equal(255, c));
    }

    [Fact]
    public void AConstantComponent_DecodesExactly()
    {
        float[] training = [1, 5, 2, 5, 3, 5];
        ScalarQuantizer quantizer = ScalarQuantizer.Train(training, 2);
        Assert.Equal(0f, quantizer.Steps[1]);
        var code = new byte[quantizer.CodeBytes];
        var decoded = new float[2];
        quantizer.Encode([2f, 5f], code);
        quantizer.Decode(code, decoded);
        Assert.Equal(5f, decoded[1]);
        Assert.Equal(0, code[1]);
    }

    [Fact]
    public void BadInput_IsRejected()
    {
        Assert.Contains("dimension must be positive", Assert.Throws<ArgumentOutOfRangeException>(() => ScalarQuantizer.Train(new float[4], 0)).Message);
        Assert.Contains("at least one row", Assert.Throws<ArgumentException>(() => ScalarQuantizer.Train([], 3)).Message);
        Assert.Contains("row 1 has a non-finite component: [0] = NaN", Assert.Throws<ArgumentException>(() => ScalarQuantizer.Train([1, 2, float.NaN, 4], 2)).Message);
        ScalarQuantizer quantizer = ScalarQuantizer.Train([1, 2, 3, 4], 2);
        Assert.Contains("codes of this quantizer take 16", Assert.Throws<ArgumentException>(() => quantizer.Encode([1f, 2f], new byte[2])).Message);
        Assert.Contains("has 3 components", Assert.Throws<ArgumentException>(() => quantizer.SquaredDistance([1f, 2f, 3f], new byte[16])).Message);
    }
}

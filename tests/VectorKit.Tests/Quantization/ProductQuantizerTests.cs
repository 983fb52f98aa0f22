using FsCheck;
using FsCheck.Xunit;
using VectorKit.Quantization;
using VectorKit.Tests.TestData;
using Xunit.Abstractions;

namespace VectorKit.Tests.Quantization;

public class ProductQuantizerTests(ITestOutputHelper output)
{
    // One quantizer shared by the property tests: 24 dimensions in 6 sub-spaces of 4, trained on clustered data.
    private static readonly Lazy<ProductQuantizer> s_quantizer = new(() =>
        ProductQuantizer.Train(ClusteredData.Generate(2000, 24, 30, 0.3f, seed: 17), 24, new ProductQuantizerOptions { CodeBytes = 6, MaxIterations = 10 }));

    [Property(MaxTest = 200)]
    public void AdcDistance_EqualsTheDistanceToTheReconstruction_WithinFloatTolerance(NormalFloat[] raw, int seed)
    {
        ProductQuantizer quantizer = s_quantizer.Value;
        float[] query = Vector(raw, 24, 0);
        float[] stored = Vector(raw, 24, seed);
        var code = new byte[quantizer.CodeBytes];
        quantizer.Encode(stored, code);
        var reconstruction = new float[24];
        quantizer.Decode(code, reconstruction);
        var table = new float[quantizer.TableLength];

        quantizer.ComputeSquaredDistanceTable(query, table);
        double squared = DoubleMath.SquaredEuclidean(query, reconstruction);
        double squaredTerms = 0, dotTerms = 0;
        for (int j = 0; j < 24; j++)
        {
            squaredTerms += (Math.Abs(query[j]) + Math.Abs(reconstruction[j])) * (Math.Abs(query[j]) + Math.Abs(reconstruction[j]));
            dotTerms += Math.Abs(query[j] * reconstruction[j]);
        }

        // A float sum of 24 rounded terms (Higham ch. 3, as in the kernel tests): (n + 2)·u·Σ|terms|, doubled.
        const double U = 1.0 / (1 << 24);
        Assert.Equal(squared, quantizer.Lookup(table, code), 2 * 26 * U * squaredTerms);

        quantizer.ComputeDotTable(query, table);
        Assert.Equal(DoubleMath.Dot(query, reconstruction), quantizer.Lookup(table, code), (2 * 26 * U * dotTerms) + 1e-30);
    }

    [Property(MaxTest = 100)]
    public void Encode_PicksTheNearestCodewordOfEverySubspace(NormalFloat[] raw, int seed)
    {
        ProductQuantizer quantizer = s_quantizer.Value;
        float[] vector = Vector(raw, 24, seed);
        var code = new byte[quantizer.CodeBytes];
        quantizer.Encode(vector, code);
        int s = quantizer.SubspaceDimension;
        for (int m = 0; m < quantizer.CodeBytes; m++)
        {
            ReadOnlySpan<float> part = vector.AsSpan(m * s, s);
            double chosen = DoubleMath.SquaredEuclidean(part, quantizer.Codewords.Slice(((m * 256) + code[m]) * s, s));
            for (int j = 0; j < 256; j++)
            {
                double other = DoubleMath.SquaredEuclidean(part, quantizer.Codewords.Slice(((m * 256) + j) * s, s));
                Assert.True(chosen <= other + (1e-5 * (1 + other)), $"sub-space {m}: codeword {code[m]} at {chosen}, but {j} at {other}");
            }
        }
    }

    [Fact]
    public void MeanSquaredError_FallsAsTheCodeGrows_Synthetic()
    {
        float[] data = ClusteredData.Generate(2000, 32, 50, 0.4f, seed: 23);
        double[] errors = [.. new[] { 2, 4, 8, 16, 32 }.Select(bytes => MeanSquaredError(data, 32, bytes))];
        output.WriteLine($"MSE at 2/4/8/16/32 bytes: {string.Join(" / ", errors.Select(e => e.ToString("G4")))}");
        for (int i = 1; i < errors.Length; i++)
        {
            Assert.True(errors[i] < errors[i - 1], $"error did not fall from {errors[i - 1]} to {errors[i]}");
        }
    }

    [DataFact]
    [Trait("Category", "Data")]
    public void MeanSquaredError_FallsAsTheCodeGrows_FashionMnist()
    {
        // 4,000 Fashion-MNIST training images (Debian dataset-fashion-mnist), codes of 8, 16, 28 and 56 bytes (divisors of 784).
        float[] data = FashionMnist.TrainImages.Data.AsSpan(0, 4000 * 784).ToArray();
        double[] errors = [.. new[] { 8, 16, 28, 56 }.Select(bytes => MeanSquaredError(data, 784, bytes))];
        output.WriteLine($"Fashion-MNIST MSE per image at 8/16/28/56 bytes: {string.Join(" / ", errors.Select(e => e.ToString("G4")))}");
        for (int i = 1; i < errors.Length; i++)
        {
            Assert.True(errors[i] < errors[i - 1], $"error did not fall from {errors[i - 1]} to {errors[i]}");
        }
    }

    [Fact]
    public void BadInput_IsRejected_WithTheMinimumAndTheDivisors()
    {
        float[] data = ClusteredData.Generate(300, 12, 5, 0.5f, seed: 1);
        var few = Assert.Throws<ArgumentException>(() => ProductQuantizer.Train(data.AsSpan(0, 255 * 12), 12, new ProductQuantizerOptions { CodeBytes = 4 }));
        Assert.Contains("has 255 rows; product quantization needs at least 256 training rows", few.Message);
        var divide = Assert.Throws<ArgumentException>(() => ProductQuantizer.Train(data, 12, new ProductQuantizerOptions { CodeBytes = 5 }));
        Assert.Contains("A code of 5 bytes does not divide the dimension 12", divide.Message);
        Assert.Contains("1, 2, 3, 4, 6, 12", divide.Message);
        data[(7 * 12) + 4] = float.PositiveInfinity;
        Assert.Contains("row 7 has a non-finite component: [4]", Assert.Throws<ArgumentException>(() => ProductQuantizer.Train(data, 12, new ProductQuantizerOptions { CodeBytes = 4 })).Message);
        Assert.Contains("CodeBytes must be in [1, 4096]", Assert.Throws<ArgumentOutOfRangeException>(() => new ProductQuantizerOptions { CodeBytes = 0 }).Message);
        Assert.Contains("SampleSize must be at least 256", Assert.Throws<ArgumentOutOfRangeException>(() => new ProductQuantizerOptions { SampleSize = 100 }).Message);
        ProductQuantizer quantizer = s_quantizer.Value;
        Assert.Contains("codes of this quantizer take 6", Assert.Throws<ArgumentException>(() => quantizer.Decode(new byte[5], new float[24])).Message);
        Assert.Contains("tables take 1536", Assert.Throws<ArgumentException>(() => quantizer.ComputeDotTable(new float[24], new float[10])).Message);
    }

    private static double MeanSquaredError(float[] data, int d, int bytes)
    {
        ProductQuantizer quantizer = ProductQuantizer.Train(data, d, new ProductQuantizerOptions { CodeBytes = bytes, MaxIterations = 8 });
        var code = new byte[bytes];
        var reconstruction = new float[d];
        double total = 0;
        int n = data.Length / d;
        for (int r = 0; r < n; r++)
        {
            quantizer.Encode(data.AsSpan(r * d, d), code);
            quantizer.Decode(code, reconstruction);
            total += DoubleMath.SquaredEuclidean(data.AsSpan(r * d, d), reconstruction);
        }

        return total / n;
    }

    // A vector of the generator's scale from FsCheck's floats (clamped, so a huge value cannot dominate every sum).
    private static float[] Vector(NormalFloat[] raw, int d, int seed)
    {
        var random = new Random(seed);
        var vector = new float[d];
        for (int j = 0; j < d; j++)
        {
            double value = raw.Length > 0 ? raw[(j + Math.Abs(seed % 97)) % raw.Length].Get : (random.NextDouble() * 2) - 1;
            vector[j] = (float)Math.Clamp(value, -3, 3) + (float)((random.NextDouble() - 0.5) * 0.1);
        }

        return vector;
    }
}

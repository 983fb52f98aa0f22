using VectorKit.Distance;
using VectorKit.Evaluation;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;
using VectorKit.IO;
using VectorKit.Tests.TestData;
using Xunit;
using Xunit.Abstractions;

namespace VectorKit.Tests.Indexes;

/// <summary>
/// The exact index under 8-bit storage over the 60,000 Fashion-MNIST training images (Xiao, Rasul &amp; Vollgraf 2017,
/// arXiv:1708.07747; Debian package dataset-fashion-mnist), trained on all of them, with the full vectors kept for
/// re-scoring; queries every tenth of the 10,000 test images; ground truth from <see cref="GroundTruth"/> (float32
/// exact search). Built once per metric for the test class.
/// </summary>
public sealed class ExactIndexScalarFashionMnistFixture : IDisposable
{
    public const int Depth = 50;

    private readonly Lazy<State> _euclidean = new(() => new State(DistanceMetric.SquaredEuclidean));
    private readonly Lazy<State> _cosine = new(() => new State(DistanceMetric.Cosine));

    public State Euclidean => _euclidean.Value;

    public State Cosine => _cosine.Value;

    public void Dispose()
    {
        if (_euclidean.IsValueCreated)
        {
            _euclidean.Value.Dispose();
        }

        if (_cosine.IsValueCreated)
        {
            _cosine.Value.Dispose();
        }
    }

    public sealed class State : IDisposable
    {
        public State(DistanceMetric metric)
        {
            VectorSet train = FashionMnist.TrainImages;
            VectorSet test = FashionMnist.TestImages;
            int d = train.Dimension;
            Queries = new float[1000 * d];
            for (int i = 0; i < 1000; i++)
            {
                test.Row(i * 10).CopyTo(Queries.AsSpan(i * d, d));
            }

            Truth = GroundTruth.Compute(train.Data, default, Queries, d, 10, metric);
            Index = new ExactIndex(d, metric, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = Depth });
            Index.Train(train.Data);
            Index.AddRange(Enumerable.Range(0, train.Count).Select(i => (long)i).ToArray(), train.Data);
        }

        public float[] Queries { get; }

        public NeighborTable Truth { get; }

        public ExactIndex Index { get; }

        public double RecallAtTen(int depth) => Recall.AtK(Truth, Index.SearchBatch(Queries, 10, new SearchOptions { RescoreDepth = depth }), 10);

        public void Dispose() => Index.Dispose();
    }
}

[Trait("Category", "Data")]
public class ExactIndexScalarFashionMnistTests(ExactIndexScalarFashionMnistFixture fixture, ITestOutputHelper output) : IClassFixture<ExactIndexScalarFashionMnistFixture>
{
    [DataFact]
    public void SquaredEuclidean_RecallAtTen_WithoutAndWithRescoring()
    {
        // Pixels are integers 0..255: where a pixel's training range is the full [0, 255] the step is exactly 1 and its
        // code is lossless, so recall is close to 1 even without re-scoring. Training and search are deterministic.
        ExactIndexScalarFashionMnistFixture.State state = fixture.Euclidean;
        double plain = state.RecallAtTen(0);
        double rescored = state.RecallAtTen(ExactIndexScalarFashionMnistFixture.Depth);
        output.WriteLine($"8-bit exact index, squared L2: recall@10 {plain:F4} without re-scoring, {rescored:F4} with {ExactIndexScalarFashionMnistFixture.Depth} re-scored");
        Assert.Equal(60_000, state.Index.Count);
        Assert.True(plain >= 0.997, $"recall@10 without re-scoring was {plain:F4}"); // measured 1.0000 (this test, 2 runs); floor = measured - 0.003
        Assert.True(rescored >= 0.997, $"recall@10 with re-scoring was {rescored:F4}"); // measured 1.0000 (this test, 2 runs); floor = measured - 0.003
    }

    [DataFact]
    public void Cosine_RecallAtTen_WithoutAndWithRescoring()
    {
        // Unit-length images are real-valued: here the codes do lose information. Deterministic.
        ExactIndexScalarFashionMnistFixture.State state = fixture.Cosine;
        double plain = state.RecallAtTen(0);
        double rescored = state.RecallAtTen(ExactIndexScalarFashionMnistFixture.Depth);
        output.WriteLine($"8-bit exact index, cosine: recall@10 {plain:F4} without re-scoring, {rescored:F4} with {ExactIndexScalarFashionMnistFixture.Depth} re-scored");
        Assert.True(plain >= 0.9737, $"recall@10 without re-scoring was {plain:F4}"); // measured 0.9767 (this test, 2 runs); floor = measured - 0.003
        Assert.True(rescored >= 0.997, $"recall@10 with re-scoring was {rescored:F4}"); // measured 1.0000 (this test, 2 runs); floor = measured - 0.003
        Assert.True(rescored > plain, "re-scoring should recover neighbours the codes misrank");
    }
}

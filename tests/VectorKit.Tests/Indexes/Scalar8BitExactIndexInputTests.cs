using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Tests.Indexes;

/// <summary>The shared bad-input checks on the exact index under 8-bit storage (trained on ±unit rows, so [−1, 1] per component).</summary>
public class Scalar8BitExactIndexInputTests : VectorIndexInputTests
{
    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new ExactIndex(dimension, metric, new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit, RescoreDepth = 2 });
        var sample = new float[2 * dimension * dimension];
        for (int i = 0; i < dimension; i++)
        {
            sample[(i * dimension) + i] = 1;
            sample[((dimension + i) * dimension) + i] = -1;
        }

        index.Train(sample);
        return index;
    }
}

using VectorKit.Distance;
using VectorKit.Indexes;
using VectorKit.Indexes.Exact;

namespace VectorKit.Tests.Indexes.Contract;

/// <summary>The exact index over 8-bit codes, without re-scoring: distances are to the decoded codes.</summary>
public sealed class ExactScalarContract : IndexContractTests
{
    protected override bool IsExact => false;

    // Every code is scanned; only code error reorders near neighbours. Measured 0.99+ on this set; a scan that missed
    // rows or mis-decoded codes falls far below.
    protected override double RecallFloor => 0.95;

    protected override bool ReportsExactDistances => false;

    // Half a quantization step of ranges about 3.5 wide: 0.007; twice that allows for clamping at the range ends.
    protected override double? StoredVectorTolerance => 0.015;

    protected override IVectorIndex Create(int dimension, DistanceMetric metric)
    {
        var index = new ExactIndex(dimension, metric, Given(new ExactIndexOptions { Encoding = VectorEncoding.Scalar8Bit }));
        index.Train(ContractData.TrainingSample(dimension));
        return index;
    }

    protected override int ExpectedCodeBytes(int dimension) => (dimension + 15) / 16 * 16;
}

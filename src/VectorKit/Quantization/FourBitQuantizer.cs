using System.Numerics;
using System.Runtime.InteropServices;
using VectorKit.Clustering;
using VectorKit.Internal;

namespace VectorKit.Quantization;

/// <summary>
/// Product quantization with 16 codewords per sub-space (4 bits), two sub-spaces per code byte: the quantizer under the
/// inverted file's fast-scan layout. A code of <c>B</c> bytes cuts the vector into <c>2B</c> sub-spaces; byte <c>i</c>
/// holds sub-space <c>2i</c> in its low nibble and sub-space <c>2i + 1</c> in its high nibble.
/// </summary>
/// <remarks>
/// With 16 codewords a sub-space's lookup table is 16 values, small enough to sit in one SIMD register once quantised
/// to 8 bits, which is what <see cref="FastScanKernel"/> relies on. An optional orthogonal rotation works as in
/// <see cref="ProductQuantizer"/>. Immutable once built, and thread-safe.
/// </remarks>
internal sealed class FourBitQuantizer
{
    /// <summary>Codewords per sub-space: one nibble of code.</summary>
    public const int CodewordsPerSubspace = 16;

    // [m][j][t] row-major: sub-space, codeword, component.
    private readonly float[] _codewords;
    private readonly float[]? _rotation;

    // Derived: [m][t][j], the 16 codewords' component t side by side (one SIMD row per component), and ‖c_{m,j}‖².
    private readonly float[] _transposed;
    private readonly float[] _norms;

    private FourBitQuantizer(float[] codewords, int dimension, int codeBytes, float[]? rotation)
    {
        _codewords = codewords;
        _rotation = rotation;
        Dimension = dimension;
        CodeBytes = codeBytes;
        Subspaces = 2 * codeBytes;
        SubspaceDimension = dimension / Subspaces;
        int s = SubspaceDimension;
        _transposed = new float[codewords.Length];
        _norms = new float[Subspaces * CodewordsPerSubspace];
        for (int m = 0; m < Subspaces; m++)
        {
            for (int j = 0; j < CodewordsPerSubspace; j++)
            {
                double norm = 0;
                for (int t = 0; t < s; t++)
                {
                    float c = codewords[(((m * CodewordsPerSubspace) + j) * s) + t];
                    _transposed[(((m * s) + t) * CodewordsPerSubspace) + j] = c;
                    norm += (double)c * c;
                }

                _norms[(m * CodewordsPerSubspace) + j] = (float)norm;
            }
        }
    }

    public int Dimension { get; }

    public int CodeBytes { get; }

    /// <summary>Sub-spaces: two per code byte.</summary>
    public int Subspaces { get; }

    public int SubspaceDimension { get; }

    /// <summary>Floats in a lookup table: <see cref="Subspaces"/> × 16.</summary>
    public int TableLength => Subspaces * CodewordsPerSubspace;

    /// <summary>The codewords: per sub-space, 16 rows of <see cref="SubspaceDimension"/> floats (rotated space).</summary>
    public ReadOnlySpan<float> Codewords => _codewords;

    public bool IsRotated => _rotation is not null;

    /// <summary>The rotation R (<c>Dimension²</c> floats, row-major), empty without one.</summary>
    public ReadOnlySpan<float> Rotation => _rotation;

    /// <summary>Whether a code of <paramref name="codeBytes"/> bytes splits <paramref name="dimension"/> into equal 4-bit sub-spaces.</summary>
    public static bool Fits(int codeBytes, int dimension) => codeBytes >= 1 && dimension % (2 * codeBytes) == 0;

    /// <summary>Throws an <see cref="ArgumentException"/> naming the valid code sizes when <see cref="Fits"/> is false.</summary>
    public static void CheckCodeBytes(int codeBytes, int dimension, string paramName)
    {
        if (!Fits(codeBytes, dimension))
        {
            var sizes = Enumerable.Range(1, Math.Min(dimension / 2, 2048)).Where(b => Fits(b, dimension));
            ThrowHelper.ThrowArgument(paramName, $"A four-bit product code of {codeBytes} bytes has {2 * codeBytes} sub-spaces, which do not divide the dimension {dimension}; choose a size whose double divides {dimension}: {string.Join(", ", sizes)}.");
        }
    }

    /// <summary>Rebuilds a quantizer from stored codewords (16 × dimension floats) and rotation.</summary>
    /// <exception cref="InvalidDataException">A size does not fit, a length is wrong, or a value is not finite.</exception>
    public static FourBitQuantizer FromCodewords(float[] codewords, int dimension, int codeBytes, float[]? rotation)
    {
        if (rotation is not null)
        {
            BalancedRotation.Check(rotation, dimension);
        }

        if (!Fits(codeBytes, dimension))
        {
            throw new InvalidDataException($"a four-bit product code of {codeBytes} bytes ({2 * codeBytes} sub-spaces) does not divide the dimension {dimension}");
        }

        long expected = (long)dimension * CodewordsPerSubspace;
        if (codewords.Length != expected)
        {
            throw new InvalidDataException($"the four-bit codebooks hold {codewords.Length} floats; {2 * codeBytes} sub-spaces of 16 codewords need {expected}");
        }

        int finite = codewords.AsSpan().IndexOfAnyExceptInRange(float.MinValue, float.MaxValue);
        if (finite >= 0)
        {
            throw new InvalidDataException($"four-bit codebook component {finite} is {codewords[finite].ToString(System.Globalization.CultureInfo.InvariantCulture)}; codewords must be finite");
        }

        return new FourBitQuantizer(codewords, dimension, codeBytes, rotation);
    }

    /// <summary>
    /// Learns the rotation (when asked) and 16 codewords per sub-space by k-means on the (rotated) rows (the inverted
    /// file samples them). The caller has checked the rows (finite, at least 16) and the code size.
    /// </summary>
    public static FourBitQuantizer Train(ReadOnlySpan<float> vectors, int dimension, int codeBytes, SubspaceRotation rotationKind, int maxIterations, int seed, int parallelism, IProgress<int>? progress, CancellationToken cancellationToken)
    {
        int subspaces = 2 * codeBytes;
        int s = dimension / subspaces;
        float[] sample = vectors.ToArray();
        int rows = sample.Length / dimension;
        float[]? rotation = null;
        if (rotationKind != SubspaceRotation.None)
        {
            rotation = BalancedRotation.Learn(sample, rows, dimension, subspaces, parallelism, cancellationToken);
            sample = BalancedRotation.RotateRows(rotation, sample, dimension, parallelism, cancellationToken);
        }

        var codewords = new float[subspaces * CodewordsPerSubspace * s];
        int done = 0;
        var parallel = new ParallelOptions { MaxDegreeOfParallelism = parallelism, CancellationToken = cancellationToken };
        Parallel.For(0, subspaces, parallel, subspace =>
        {
            var part = new float[rows * s];
            for (int r = 0; r < rows; r++)
            {
                sample.AsSpan((r * dimension) + (subspace * s), s).CopyTo(part.AsSpan(r * s, s));
            }

            var kmeans = new KMeansOptions
            {
                ClusterCount = CodewordsPerSubspace,
                MaxIterations = maxIterations,
                SampleSize = rows,
                Seed = seed + subspace,
                MaxDegreeOfParallelism = 1,
            };
            KMeansResult result = KMeans.Train(part, s, kmeans, null, cancellationToken);
            result.Centroids.CopyTo(codewords.AsSpan(subspace * CodewordsPerSubspace * s, CodewordsPerSubspace * s));
            progress?.Report(Interlocked.Increment(ref done));
        });

        return new FourBitQuantizer(codewords, dimension, codeBytes, rotation);
    }

    /// <summary><c>y = R·x</c> (a copy without rotation).</summary>
    public void Rotate(ReadOnlySpan<float> x, Span<float> y)
    {
        if (_rotation is null)
        {
            x.CopyTo(y);
        }
        else
        {
            BalancedRotation.Rotate(_rotation, x, y);
        }
    }

    /// <summary>Encodes a vector already in the codebooks' space: per sub-space the nearest codeword (ties to the lower number), packed two per byte.</summary>
    public void EncodeUnchecked(ReadOnlySpan<float> vector, Span<byte> code)
    {
        int s = SubspaceDimension;
        for (int i = 0; i < CodeBytes; i++)
        {
            int low = Nearest(vector.Slice(2 * i * s, s), 2 * i);
            int high = Nearest(vector.Slice(((2 * i) + 1) * s, s), (2 * i) + 1);
            code[i] = (byte)(low | (high << 4));
        }
    }

    /// <summary>The reconstruction of a packed code (rotated back by Rᵀ when rotated); <paramref name="scratch"/> holds <see cref="Dimension"/> floats under a rotation.</summary>
    public void Decode(ReadOnlySpan<byte> code, Span<float> vector, Span<float> scratch)
    {
        int s = SubspaceDimension;
        Span<float> target = _rotation is null ? vector : scratch;
        for (int m = 0; m < Subspaces; m++)
        {
            int codeword = (code[m >> 1] >> ((m & 1) * 4)) & 0xF;
            _codewords.AsSpan(((m * CodewordsPerSubspace) + codeword) * s, s).CopyTo(target.Slice(m * s, s));
        }

        if (_rotation is not null)
        {
            BalancedRotation.RotateBack(_rotation, scratch, vector);
        }
    }

    /// <summary><c>table[m × 16 + j] = scale × (x_m · c_{m,j})</c> for <paramref name="x"/> in the codebooks' space: one SIMD row of 16 codewords per component.</summary>
    public void FillDotTerms(ReadOnlySpan<float> x, Span<float> table, float scale)
    {
        const int W = CodewordsPerSubspace;
        int s = SubspaceDimension;
        int width = Vector<float>.Count;
        if (!Vector.IsHardwareAccelerated || W % width != 0)
        {
            for (int m = 0; m < Subspaces; m++)
            {
                for (int j = 0; j < W; j++)
                {
                    float sum = 0;
                    for (int t = 0; t < s; t++)
                    {
                        sum += x[(m * s) + t] * _transposed[(((m * s) + t) * W) + j];
                    }

                    table[(m * W) + j] = scale * sum;
                }
            }

            return;
        }

        ref float transposed = ref MemoryMarshal.GetArrayDataReference(_transposed);
        ref float output = ref MemoryMarshal.GetReference(table);
        for (int m = 0; m < Subspaces; m++)
        {
            for (int j = 0; j < W; j += width)
            {
                Vector<float> sum = Vector<float>.Zero;
                for (int t = 0; t < s; t++)
                {
                    sum = Vector.FusedMultiplyAdd(new Vector<float>(x[(m * s) + t]), Vector.LoadUnsafe(ref transposed, (nuint)((((m * s) + t) * W) + j)), sum);
                }

                (sum * scale).StoreUnsafe(ref output, (nuint)((m * W) + j));
            }
        }
    }

    /// <summary>
    /// The part of a list's squared-distance table that depends only on the list: <c>‖c_{m,j}‖² + 2 (R·centroid)_m · c_{m,j}</c>.
    /// With the query's part <c>−2 (R·q)_m · c_{m,j}</c> (<see cref="FillDotTerms"/>, scale −2) and <c>‖q − centroid‖²</c>, it
    /// sums to <c>Σ_m ‖(R·(q − centroid))_m − c_{m,j_m}‖²</c>, so a probe costs one addition per table entry.
    /// </summary>
    public void FillListTerms(ReadOnlySpan<float> rotatedCentroid, Span<float> terms)
    {
        FillDotTerms(rotatedCentroid, terms, 2f);
        for (int i = 0; i < _norms.Length; i++)
        {
            terms[i] += _norms[i];
        }
    }

    /// <summary>
    /// Fills the float table of a query in the codebooks' space: <c>table[m × 16 + j]</c> is <c>‖q_m − c_{m,j}‖²</c>
    /// (<paramref name="squared"/>) or <c>−q_m · c_{m,j}</c>, so that under every metric a smaller sum is nearer.
    /// </summary>
    public void FillTable(ReadOnlySpan<float> query, Span<float> table, bool squared)
    {
        if (!squared)
        {
            FillDotTerms(query, table, -1f);
            return;
        }

        int s = SubspaceDimension;
        ReadOnlySpan<float> words = _codewords;
        for (int m = 0; m < Subspaces; m++)
        {
            ReadOnlySpan<float> q = query.Slice(m * s, s);
            for (int j = 0; j < CodewordsPerSubspace; j++)
            {
                ReadOnlySpan<float> c = words.Slice(((m * CodewordsPerSubspace) + j) * s, s);
                float sum = 0;
                for (int t = 0; t < s; t++)
                {
                    if (squared)
                    {
                        float difference = q[t] - c[t];
                        sum += difference * difference;
                    }
                    else
                    {
                        sum -= q[t] * c[t];
                    }
                }

                table[(m * CodewordsPerSubspace) + j] = sum;
            }
        }
    }

    private int Nearest(ReadOnlySpan<float> part, int subspace)
    {
        int s = SubspaceDimension;
        ReadOnlySpan<float> words = MemoryMarshal.CreateReadOnlySpan(ref _codewords[subspace * CodewordsPerSubspace * s], CodewordsPerSubspace * s);
        int best = 0;
        float bestDistance = float.PositiveInfinity;
        for (int j = 0; j < CodewordsPerSubspace; j++)
        {
            float sum = 0;
            for (int t = 0; t < s; t++)
            {
                float difference = part[t] - words[(j * s) + t];
                sum += difference * difference;
            }

            if (sum < bestDistance)
            {
                bestDistance = sum;
                best = j;
            }
        }

        return best;
    }
}

using System.Numerics;
using System.Numerics.Tensors;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using VectorKit.Clustering;
using VectorKit.Distance.Kernels;
using VectorKit.Internal;

namespace VectorKit.Quantization;

/// <summary>
/// Product quantization (Jégou, Douze &amp; Schmid, IEEE TPAMI 2011): the vector is cut into <see cref="CodeBytes"/>
/// sub-vectors of <see cref="SubspaceDimension"/> components, and each is replaced by the number of its nearest
/// codeword among 256 learnt by k-means on that sub-space, so a code is one byte per sub-space.
/// </summary>
/// <remarks>
/// <para><b>Asymmetric distance computation (ADC).</b> The query stays in float. Per query, a lookup table holds the
/// distance (or dot product) of each query sub-vector to each of the 256 codewords of its sub-space; the distance to a
/// code is then the sum of <see cref="CodeBytes"/> table entries, equal (up to float rounding) to the distance to the
/// code's reconstruction.</para>
/// <para><b>Layout.</b> The table is <c>CodeBytes × 256</c> floats, one contiguous row of 256 per sub-space. It is
/// filled a whole lane of codewords at a time from a transposed copy of the codebooks (per sub-space, per component,
/// 256 contiguous values), so building it is plain SIMD arithmetic with no gathers.</para>
/// <para><b>Rotation.</b> With <see cref="ProductQuantizerOptions.Rotation"/> set, a learnt orthogonal matrix R
/// (<see cref="Rotation"/>) is applied first: vectors and queries are quantized as <c>R·x</c>, and
/// <see cref="Decode"/> returns <c>Rᵀ·</c>(the codewords). Since R preserves distances and dot products, the ADC
/// sums still equal the distances to the decoded vectors (up to float rounding). <see cref="Codewords"/> live in the
/// rotated space.</para>
/// <para>Immutable once trained, and thread-safe.</para>
/// </remarks>
public sealed class ProductQuantizer
{
    /// <summary>Codewords per sub-space: one byte of code.</summary>
    public const int CodewordsPerSubspace = 256;

    // Codewords row-major per sub-space ([m][j][t]) for encoding, and transposed ([m][t][j]) for the tables.
    private readonly float[] _codewords;
    private readonly float[] _transposed;

    // d × d row-major, y = R·x; null without rotation.
    private readonly float[]? _rotation;

    private ProductQuantizer(float[] codewords, int dimension, int codeBytes, float[]? rotation)
    {
        _codewords = codewords;
        _rotation = rotation;
        Dimension = dimension;
        CodeBytes = codeBytes;
        SubspaceDimension = dimension / codeBytes;
        int s = SubspaceDimension;
        _transposed = new float[codewords.Length];
        for (int m = 0; m < codeBytes; m++)
        {
            for (int j = 0; j < CodewordsPerSubspace; j++)
            {
                for (int t = 0; t < s; t++)
                {
                    _transposed[(((m * s) + t) * CodewordsPerSubspace) + j] = codewords[(((m * CodewordsPerSubspace) + j) * s) + t];
                }
            }
        }
    }

    /// <summary>
    /// Rebuilds a quantizer from stored codewords (<paramref name="codeBytes"/> × 256 × dimension / codeBytes floats,
    /// the layout of <see cref="Codewords"/>) and its rotation, if any (<c>dimension²</c> floats, the layout of
    /// <see cref="Rotation"/>); the transposed copy for the tables is derived again.
    /// </summary>
    /// <exception cref="InvalidDataException">The code size does not divide the dimension, a length is wrong, a component is not finite, or a rotation row is not of unit length.</exception>
    internal static ProductQuantizer FromCodewords(float[] codewords, int dimension, int codeBytes, float[]? rotation = null)
    {
        if (rotation is not null)
        {
            BalancedRotation.Check(rotation, dimension);
        }

        if (codeBytes < 1 || dimension % codeBytes != 0)
        {
            throw new InvalidDataException($"a product code of {codeBytes} bytes does not divide the dimension {dimension}");
        }

        long expected = (long)dimension * CodewordsPerSubspace;
        if (codewords.Length != expected)
        {
            throw new InvalidDataException($"the codebooks hold {codewords.Length} floats; {codeBytes} sub-spaces of 256 codewords need {expected}");
        }

        for (int i = 0; i < codewords.Length; i++)
        {
            if (!float.IsFinite(codewords[i]))
            {
                int s = dimension / codeBytes;
                int perSubspace = CodewordsPerSubspace * s;
                throw new InvalidDataException(
                    $"codebook component {i} (sub-space {i / perSubspace}, codeword {i % perSubspace / s}) is {codewords[i].ToString(System.Globalization.CultureInfo.InvariantCulture)}; codewords must be finite");
            }
        }

        return new ProductQuantizer(codewords, dimension, codeBytes, rotation);
    }

    /// <summary>Components per vector.</summary>
    public int Dimension { get; }

    /// <summary>Bytes per code, one per sub-space.</summary>
    public int CodeBytes { get; }

    /// <summary>Components per sub-space: <see cref="Dimension"/> / <see cref="CodeBytes"/>.</summary>
    public int SubspaceDimension { get; }

    /// <summary>Floats in a lookup table: <see cref="CodeBytes"/> × 256.</summary>
    public int TableLength => CodeBytes * CodewordsPerSubspace;

    /// <summary>The codewords: for each sub-space, 256 rows of <see cref="SubspaceDimension"/> floats (in the rotated space when <see cref="IsRotated"/>).</summary>
    public ReadOnlySpan<float> Codewords => _codewords;

    /// <summary>Whether vectors are rotated before quantization (<see cref="ProductQuantizerOptions.Rotation"/> was not <see cref="SubspaceRotation.None"/>).</summary>
    public bool IsRotated => _rotation is not null;

    /// <summary>
    /// The learnt orthogonal rotation R, <see cref="Dimension"/> × <see cref="Dimension"/> floats row-major (a vector x
    /// is quantized as <c>R·x</c>); empty when <see cref="IsRotated"/> is <see langword="false"/>.
    /// </summary>
    public ReadOnlySpan<float> Rotation => _rotation;

    /// <summary>Learns the rotation (when <see cref="ProductQuantizerOptions.Rotation"/> asks for one), then the 256 codewords of every sub-space by k-means on the (rotated) training rows.</summary>
    /// <param name="vectors">Row after row, a multiple of <paramref name="dimension"/> finite components; at least 256 rows.</param>
    /// <param name="dimension">Components per row; <see cref="ProductQuantizerOptions.CodeBytes"/> must divide it.</param>
    /// <param name="options">Code size, iterations, sample, seed, threads; <see langword="null"/> for <see cref="ProductQuantizerOptions.Default"/>.</param>
    /// <param name="progress">Optional; receives the number of sub-spaces trained so far, from worker threads.</param>
    /// <param name="cancellationToken">Stops training between sub-spaces and iterations.</param>
    /// <returns>The trained quantizer.</returns>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is not positive.</exception>
    /// <exception cref="ArgumentException">The code size does not divide the dimension; fewer than 256 rows (the message names the minimum); a length that is not a multiple of the dimension; a non-finite component.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public static ProductQuantizer Train(
        ReadOnlySpan<float> vectors,
        int dimension,
        ProductQuantizerOptions? options = null,
        IProgress<int>? progress = null,
        CancellationToken cancellationToken = default)
    {
        options ??= ProductQuantizerOptions.Default;
        if (dimension <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(dimension), dimension, "must be positive");
        }

        CheckCodeBytes(options.CodeBytes, dimension, nameof(options));
        if (vectors.Length % dimension != 0)
        {
            ThrowHelper.ThrowArgument(nameof(vectors), $"vectors has {vectors.Length} components, not a multiple of the dimension {dimension}.");
        }

        int n = vectors.Length / dimension;
        if (n < CodewordsPerSubspace)
        {
            ThrowHelper.ThrowArgument(nameof(vectors), $"vectors has {n} rows; product quantization needs at least {CodewordsPerSubspace} training rows (one per codeword of a sub-space).");
        }

        VectorChecks.CheckFinite(vectors, nameof(vectors), 0, dimension);
        int m = options.CodeBytes;
        int s = dimension / m;
        float[] sample = SampleRows(vectors, dimension, options.SampleSize, options.Seed);
        int rows = sample.Length / dimension;
        float[]? rotation = null;
        if (options.Rotation != SubspaceRotation.None)
        {
            rotation = BalancedRotation.Learn(sample, rows, dimension, m, options.EffectiveParallelism, cancellationToken);
            sample = BalancedRotation.RotateRows(rotation, sample, dimension, options.EffectiveParallelism, cancellationToken);
        }

        var codewords = new float[m * CodewordsPerSubspace * s];
        int done = 0;
        var parallel = new ParallelOptions { MaxDegreeOfParallelism = options.EffectiveParallelism, CancellationToken = cancellationToken };
        Parallel.For(0, m, parallel, subspace =>
        {
            var part = new float[rows * s];
            for (int r = 0; r < rows; r++)
            {
                sample.AsSpan((r * dimension) + (subspace * s), s).CopyTo(part.AsSpan(r * s, s));
            }

            var kmeans = new KMeansOptions
            {
                ClusterCount = CodewordsPerSubspace,
                MaxIterations = options.MaxIterations,
                SampleSize = rows,
                Seed = options.Seed + subspace,
                MaxDegreeOfParallelism = 1,
            };
            KMeansResult result = KMeans.Train(part, s, kmeans, null, cancellationToken);
            result.Centroids.CopyTo(codewords.AsSpan(subspace * CodewordsPerSubspace * s, CodewordsPerSubspace * s));
            progress?.Report(Interlocked.Increment(ref done));
        });

        return new ProductQuantizer(codewords, dimension, m, rotation);
    }

    /// <summary>Encodes a vector: the nearest codeword (squared Euclidean) of each sub-vector.</summary>
    /// <param name="vector">Exactly <see cref="Dimension"/> finite components.</param>
    /// <param name="code">At least <see cref="CodeBytes"/> bytes.</param>
    /// <exception cref="ArgumentException">Wrong lengths or a non-finite component.</exception>
    public void Encode(ReadOnlySpan<float> vector, Span<byte> code)
    {
        VectorChecks.CheckVector(vector, Dimension, nameof(vector));
        CheckCode(code.Length, nameof(code));
        using var table = ScratchRental<float>.Rent(TableLength + (_rotation is null ? 0 : Dimension));
        if (_rotation is not null)
        {
            Span<float> rotated = table.Span.Slice(TableLength, Dimension);
            Rotate(vector, rotated);
            vector = rotated;
        }

        EncodeUnchecked(vector, code, table.Span);
    }

    /// <summary>Writes the reconstruction of a code: its codewords side by side (rotated back by <c>Rᵀ</c> when <see cref="IsRotated"/>).</summary>
    /// <param name="code">At least <see cref="CodeBytes"/> bytes.</param>
    /// <param name="vector">Receives <see cref="Dimension"/> components.</param>
    /// <exception cref="ArgumentException">Wrong lengths.</exception>
    public void Decode(ReadOnlySpan<byte> code, Span<float> vector)
    {
        CheckCode(code.Length, nameof(code));
        if (vector.Length < Dimension)
        {
            ThrowHelper.ThrowArgument(nameof(vector), $"vector has {vector.Length} elements; the dimension is {Dimension}.");
        }

        if (_rotation is null)
        {
            DecodeUnrotated(code, vector);
            return;
        }

        using var rotated = ScratchRental<float>.Rent(Dimension);
        DecodeUnrotated(code, rotated.Span);
        BalancedRotation.RotateBack(_rotation, rotated.Span, vector);
    }

    /// <summary>Fills the squared-distance lookup table: <c>table[m × 256 + j] = ‖query_m − codeword_{m,j}‖²</c>.</summary>
    /// <param name="query">Exactly <see cref="Dimension"/> components.</param>
    /// <param name="table">At least <see cref="TableLength"/> floats.</param>
    /// <exception cref="ArgumentException">Wrong lengths.</exception>
    public void ComputeSquaredDistanceTable(ReadOnlySpan<float> query, Span<float> table)
    {
        CheckTableArguments(query, table);
        FillRotatingTable(query, table, squared: true);
    }

    /// <summary>Fills the dot-product lookup table: <c>table[m × 256 + j] = query_m · codeword_{m,j}</c>.</summary>
    /// <param name="query">Exactly <see cref="Dimension"/> components.</param>
    /// <param name="table">At least <see cref="TableLength"/> floats.</param>
    /// <exception cref="ArgumentException">Wrong lengths.</exception>
    public void ComputeDotTable(ReadOnlySpan<float> query, Span<float> table)
    {
        CheckTableArguments(query, table);
        FillRotatingTable(query, table, squared: false);
    }

    /// <summary>The ADC sum for one code: <c>Σ_m table[m × 256 + code[m]]</c>.</summary>
    /// <param name="table">A table from this quantizer.</param>
    /// <param name="code">At least <see cref="CodeBytes"/> bytes.</param>
    /// <returns>The distance (or dot product) between the table's query and the code's reconstruction.</returns>
    /// <exception cref="ArgumentException">Wrong lengths.</exception>
    public float Lookup(ReadOnlySpan<float> table, ReadOnlySpan<byte> code)
    {
        CheckCode(code.Length, nameof(code));
        if (table.Length < TableLength)
        {
            ThrowHelper.ThrowArgument(nameof(table), $"table has {table.Length} floats; this quantizer's tables take {TableLength}.");
        }

        float result = 0;
        Scan(ref MemoryMarshal.GetReference(table), ref MemoryMarshal.GetReference(code), 1, ref result);
        return result;
    }

    internal static void CheckCodeBytes(int codeBytes, int dimension, string paramName)
    {
        if (dimension % codeBytes != 0)
        {
            var divisors = Enumerable.Range(1, Math.Min(dimension, 256)).Where(x => dimension % x == 0);
            ThrowHelper.ThrowArgument(paramName, $"A code of {codeBytes} bytes does not divide the dimension {dimension} into equal sub-spaces; choose a divisor of {dimension}: {string.Join(", ", divisors)}.");
        }
    }

    /// <summary><c>y = R·x</c> (a copy without rotation): the space the codebooks, <see cref="EncodeUnchecked"/> and <see cref="FillTable"/> work in.</summary>
    internal void Rotate(ReadOnlySpan<float> x, Span<float> y)
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

    /// <summary>
    /// Encodes a vector already in the codebooks' space (rotated when <see cref="IsRotated"/>) through the squared-distance table: the distances of each sub-vector to its 256 codewords come out of
    /// the SIMD table fill, and each code byte is the first index of the smallest (ties go to the lower codeword).
    /// </summary>
    internal void EncodeUnchecked(ReadOnlySpan<float> vector, Span<byte> code, Span<float> table)
    {
        FillTable(vector, table, squared: true);
        for (int m = 0; m < CodeBytes; m++)
        {
            code[m] = (byte)TensorPrimitives.IndexOfMin(table.Slice(m * CodewordsPerSubspace, CodewordsPerSubspace));
        }
    }

    /// <summary>Fills a table for a query already in the codebooks' space (rotated when <see cref="IsRotated"/>).</summary>
    internal void FillTable(ReadOnlySpan<float> query, Span<float> table, bool squared)
    {
        int s = SubspaceDimension;
        int width = Vector<float>.Count;
        ref float transposed = ref MemoryMarshal.GetArrayDataReference(_transposed);
        for (int m = 0; m < CodeBytes; m++)
        {
            Span<float> row = table.Slice(m * CodewordsPerSubspace, CodewordsPerSubspace);
            ref float output = ref MemoryMarshal.GetReference(row);
            for (int j = 0; j < CodewordsPerSubspace; j += width)
            {
                // One lane of codewords j..j+width at a time, summed over the sub-space's components.
                Vector<float> sum = Vector<float>.Zero;
                for (int t = 0; t < s; t++)
                {
                    var q = new Vector<float>(query[(m * s) + t]);
                    Vector<float> c = Vector.LoadUnsafe(ref transposed, (nuint)((((m * s) + t) * CodewordsPerSubspace) + j));
                    if (squared)
                    {
                        Vector<float> difference = q - c;
                        sum = Vector.FusedMultiplyAdd(difference, difference, sum);
                    }
                    else
                    {
                        sum = Vector.FusedMultiplyAdd(q, c, sum);
                    }
                }

                sum.StoreUnsafe(ref output, (nuint)j);
            }
        }
    }

    /// <summary>ADC sums for <paramref name="count"/> consecutive codes, four at a time so four table reads are in flight.</summary>
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    internal void Scan(ref float table, ref byte codes, int count, ref float results)
    {
        nint m = CodeBytes;
        nint r = 0;
        for (; r <= count - 4; r += 4)
        {
            ref byte c0 = ref Unsafe.Add(ref codes, r * m);
            ref byte c1 = ref Unsafe.Add(ref c0, m);
            ref byte c2 = ref Unsafe.Add(ref c1, m);
            ref byte c3 = ref Unsafe.Add(ref c2, m);
            float s0 = 0, s1 = 0, s2 = 0, s3 = 0;
            ref float row = ref table;
            for (nint i = 0; i < m; i++)
            {
                s0 += Unsafe.Add(ref row, Unsafe.Add(ref c0, i));
                s1 += Unsafe.Add(ref row, Unsafe.Add(ref c1, i));
                s2 += Unsafe.Add(ref row, Unsafe.Add(ref c2, i));
                s3 += Unsafe.Add(ref row, Unsafe.Add(ref c3, i));
                row = ref Unsafe.Add(ref row, CodewordsPerSubspace);
            }

            Unsafe.Add(ref results, r) = s0;
            Unsafe.Add(ref results, r + 1) = s1;
            Unsafe.Add(ref results, r + 2) = s2;
            Unsafe.Add(ref results, r + 3) = s3;
        }

        for (; r < count; r++)
        {
            ref byte c0 = ref Unsafe.Add(ref codes, r * m);
            float s0 = 0;
            ref float row = ref table;
            for (nint i = 0; i < m; i++)
            {
                s0 += Unsafe.Add(ref row, Unsafe.Add(ref c0, i));
                row = ref Unsafe.Add(ref row, CodewordsPerSubspace);
            }

            Unsafe.Add(ref results, r) = s0;
        }
    }

    private void FillRotatingTable(ReadOnlySpan<float> query, Span<float> table, bool squared)
    {
        if (_rotation is null)
        {
            FillTable(query, table, squared);
            return;
        }

        using var rotated = ScratchRental<float>.Rent(Dimension);
        Rotate(query, rotated.Span);
        FillTable(rotated.Span, table, squared);
    }

    private void DecodeUnrotated(ReadOnlySpan<byte> code, Span<float> vector)
    {
        int s = SubspaceDimension;
        for (int m = 0; m < CodeBytes; m++)
        {
            _codewords.AsSpan(((m * CodewordsPerSubspace) + code[m]) * s, s).CopyTo(vector.Slice(m * s, s));
        }
    }

    private static float[] SampleRows(ReadOnlySpan<float> vectors, int dimension, int size, int seed)
    {
        int n = vectors.Length / dimension;
        if (n <= size)
        {
            return vectors.ToArray();
        }

        var random = new Random(seed);
        var order = new int[n];
        for (int i = 0; i < n; i++)
        {
            order[i] = i;
        }

        for (int i = 0; i < size; i++)
        {
            int j = random.Next(i, n);
            (order[i], order[j]) = (order[j], order[i]);
        }

        Array.Sort(order, 0, size);
        var sample = new float[size * dimension];
        for (int i = 0; i < size; i++)
        {
            vectors.Slice(order[i] * dimension, dimension).CopyTo(sample.AsSpan(i * dimension, dimension));
        }

        return sample;
    }

    private void CheckTableArguments(ReadOnlySpan<float> query, Span<float> table)
    {
        if (query.Length != Dimension)
        {
            ThrowHelper.ThrowDimensionMismatch(nameof(query), Dimension, query.Length);
        }

        if (table.Length < TableLength)
        {
            ThrowHelper.ThrowArgument(nameof(table), $"table has {table.Length} floats; this quantizer's tables take {TableLength}.");
        }
    }

    private void CheckCode(int length, string paramName)
    {
        if (length < CodeBytes)
        {
            ThrowHelper.ThrowArgument(paramName, $"{paramName} has {length} bytes; codes of this quantizer take {CodeBytes}.");
        }
    }
}

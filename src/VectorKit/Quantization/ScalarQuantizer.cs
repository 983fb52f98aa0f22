using System.Runtime.InteropServices;
using VectorKit.Distance.Kernels;
using VectorKit.Internal;

namespace VectorKit.Quantization;

/// <summary>
/// Scalar quantization to one byte per component: each component is mapped linearly from its trained range
/// [minimum, maximum] onto the codes 0..255, and decoded as <c>minimum + step·code</c> with <c>step = (maximum − minimum)/255</c>.
/// </summary>
/// <remarks>
/// <para>Values outside the trained range are clamped to its ends. A component that never varied in training
/// (maximum = minimum) decodes exactly to that value. The largest error per in-range component is half a step.</para>
/// <para>Codes take <see cref="CodeBytes"/> bytes: the dimension rounded up to a multiple of 16, the padding bytes
/// zero, so the SIMD distance kernel never needs a tail. Distances are computed between a float query and the decoded
/// code, with a kernel that widens 16, 8 or 4 code bytes to floats per step.</para>
/// <para>Immutable once trained, and thread-safe.</para>
/// </remarks>
public sealed class ScalarQuantizer
{
    private readonly float[] _minimums;
    private readonly float[] _steps;

    private ScalarQuantizer(float[] minimums, float[] steps, int dimension)
    {
        _minimums = minimums;
        _steps = steps;
        Dimension = dimension;
        CodeBytes = PaddedLength(dimension);
    }

    /// <summary>Components per vector.</summary>
    public int Dimension { get; }

    /// <summary>Bytes per code: <see cref="Dimension"/> rounded up to a multiple of 16.</summary>
    public int CodeBytes { get; }

    /// <summary>The trained minimum of each component (padded with zeros to <see cref="CodeBytes"/>).</summary>
    public ReadOnlySpan<float> Minimums => _minimums.AsSpan(0, Dimension);

    /// <summary>The decoding step of each component: (maximum − minimum) / 255.</summary>
    public ReadOnlySpan<float> Steps => _steps.AsSpan(0, Dimension);

    /// <summary>Learns each component's range from training rows.</summary>
    /// <param name="vectors">Row after row, a multiple of <paramref name="dimension"/> finite components; at least one row.</param>
    /// <param name="dimension">Components per row, at least 1.</param>
    /// <param name="progress">Optional; receives the number of rows scanned so far, every 4,096 rows and at the end.</param>
    /// <param name="cancellationToken">Checked every 4,096 rows.</param>
    /// <returns>The trained quantizer.</returns>
    /// <remarks>One pass over the rows: the ranges are the per-component minimum and maximum, so there is nothing to tune.</remarks>
    /// <exception cref="ArgumentOutOfRangeException"><paramref name="dimension"/> is not positive.</exception>
    /// <exception cref="ArgumentException">No rows, a length that is not a multiple of the dimension, or a non-finite component.</exception>
    /// <exception cref="OperationCanceledException">The token was cancelled.</exception>
    public static ScalarQuantizer Train(ReadOnlySpan<float> vectors, int dimension, IProgress<int>? progress = null, CancellationToken cancellationToken = default)
    {
        const int ReportRows = 4096;
        if (dimension <= 0)
        {
            ThrowHelper.ThrowArgumentOutOfRange(nameof(dimension), dimension, "must be positive");
        }

        if (vectors.Length % dimension != 0 || vectors.Length == 0)
        {
            ThrowHelper.ThrowArgument(nameof(vectors), $"vectors has {vectors.Length} components; training needs at least one row and a multiple of the dimension {dimension}.");
        }

        VectorChecks.CheckFinite(vectors, nameof(vectors), 0, dimension);
        int padded = PaddedLength(dimension);
        var minimums = new float[padded];
        var maximums = new float[dimension];
        vectors[..dimension].CopyTo(minimums);
        vectors[..dimension].CopyTo(maximums);
        int rows = vectors.Length / dimension;
        for (int r = 1; r < rows; r++)
        {
            if (r % ReportRows == 0)
            {
                cancellationToken.ThrowIfCancellationRequested();
                progress?.Report(r);
            }

            ReadOnlySpan<float> row = vectors.Slice(r * dimension, dimension);
            for (int j = 0; j < dimension; j++)
            {
                minimums[j] = Math.Min(minimums[j], row[j]);
                maximums[j] = Math.Max(maximums[j], row[j]);
            }
        }

        progress?.Report(rows);
        var steps = new float[padded];
        for (int j = 0; j < dimension; j++)
        {
            // Computed in double: max − min of two finite floats can overflow float.
            steps[j] = (float)(((double)maximums[j] - minimums[j]) / 255.0);
        }

        return new ScalarQuantizer(minimums, steps, dimension);
    }

    /// <summary>Encodes a vector into <see cref="CodeBytes"/> bytes (padding bytes zero).</summary>
    /// <param name="vector">Exactly <see cref="Dimension"/> finite components.</param>
    /// <param name="code">At least <see cref="CodeBytes"/> bytes.</param>
    /// <exception cref="ArgumentException">Wrong lengths or a non-finite component.</exception>
    public void Encode(ReadOnlySpan<float> vector, Span<byte> code)
    {
        VectorChecks.CheckVector(vector, Dimension, nameof(vector));
        CheckCode(code.Length, nameof(code));
        EncodeUnchecked(vector, code);
    }

    /// <summary>Decodes a code into <see cref="Dimension"/> floats.</summary>
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

        for (int j = 0; j < Dimension; j++)
        {
            vector[j] = MathF.FusedMultiplyAdd(_steps[j], code[j], _minimums[j]);
        }
    }

    /// <summary>The squared Euclidean distance <c>Σ (q[i] − decoded[i])²</c> between a query and a code's decoded vector, on the SIMD kernel.</summary>
    /// <param name="query">Exactly <see cref="Dimension"/> components.</param>
    /// <param name="code">At least <see cref="CodeBytes"/> bytes.</param>
    /// <returns>The distance, summed in float.</returns>
    /// <exception cref="ArgumentException">Wrong lengths.</exception>
    public float SquaredDistance(ReadOnlySpan<float> query, ReadOnlySpan<byte> code) => Single<SquaredDifferenceStep>(query, code);

    /// <summary>The dot product <c>Σ q[i]·decoded[i]</c> of a query and a code's decoded vector, on the SIMD kernel.</summary>
    /// <param name="query">Exactly <see cref="Dimension"/> components.</param>
    /// <param name="code">At least <see cref="CodeBytes"/> bytes.</param>
    /// <returns>The dot product, summed in float.</returns>
    /// <exception cref="ArgumentException">Wrong lengths.</exception>
    public float Dot(ReadOnlySpan<float> query, ReadOnlySpan<byte> code) => Single<DotStep>(query, code);

    /// <summary>The ranges as a file stores them: the minimums, then the steps (the inverse of <see cref="FromRanges"/>).</summary>
    internal float[] ToRanges()
    {
        var ranges = new float[2 * Dimension];
        Minimums.CopyTo(ranges);
        Steps.CopyTo(ranges.AsSpan(Dimension));
        return ranges;
    }

    /// <summary>
    /// Rebuilds a quantizer from stored ranges (<paramref name="minimums"/> and <paramref name="steps"/>, each
    /// <paramref name="dimension"/> values), checking what decoding relies on: finite minimums, finite non-negative
    /// steps, and a finite top of every range (minimum + 255·step).
    /// </summary>
    /// <exception cref="InvalidDataException">A value breaks those rules; the message names the component.</exception>
    internal static ScalarQuantizer FromRanges(ReadOnlySpan<float> minimums, ReadOnlySpan<float> steps, int dimension)
    {
        int padded = PaddedLength(dimension);
        var paddedMinimums = new float[padded];
        var paddedSteps = new float[padded];
        for (int j = 0; j < dimension; j++)
        {
            float minimum = minimums[j];
            float step = steps[j];
            if (!float.IsFinite(minimum) || !float.IsFinite(step) || step < 0 || !double.IsFinite((float)(minimum + (255.0 * step))))
            {
                throw new InvalidDataException(
                    $"the scalar range of component {j} (minimum {minimum.ToString(System.Globalization.CultureInfo.InvariantCulture)}, step {step.ToString(System.Globalization.CultureInfo.InvariantCulture)}) is not usable: the minimum and step must be finite, the step non-negative, and minimum + 255·step finite");
            }

            paddedMinimums[j] = minimum;
            paddedSteps[j] = step;
        }

        return new ScalarQuantizer(paddedMinimums, paddedSteps, dimension);
    }

    /// <summary>The first decoding step, padded with zeros to <see cref="CodeBytes"/> (the kernel's scales).</summary>
    internal ref float ScaleReference => ref MemoryMarshal.GetArrayDataReference(_steps);

    /// <summary>The first minimum, padded with zeros to <see cref="CodeBytes"/> (the kernel's offsets).</summary>
    internal ref float OffsetReference => ref MemoryMarshal.GetArrayDataReference(_minimums);

    /// <summary>
    /// Decodes a code into <see cref="CodeBytes"/> floats, zeros in the padding, with the kernel's multiply-add: the
    /// result serves as a prepared query against other codes.
    /// </summary>
    internal void DecodePadded(ReadOnlySpan<byte> code, Span<float> padded)
    {
        int n = CodeBytes;
        ReadOnlySpan<float> steps = _steps.AsSpan(0, n);
        ReadOnlySpan<float> minimums = _minimums.AsSpan(0, n);
        code = code[..n];
        padded = padded[..n];
        for (int j = 0; j < n; j++)
        {
            padded[j] = float.MultiplyAddEstimate(steps[j], code[j], minimums[j]);
        }
    }

    internal static int PaddedLength(int dimension) => (dimension + ByteCodeKernel.Granularity - 1) / ByteCodeKernel.Granularity * ByteCodeKernel.Granularity;

    internal void EncodeUnchecked(ReadOnlySpan<float> vector, Span<byte> code)
    {
        for (int j = 0; j < Dimension; j++)
        {
            float step = _steps[j];
            float level = step > 0 ? MathF.Round((vector[j] - _minimums[j]) / step) : 0f;
            code[j] = (byte)Math.Clamp(level, 0f, 255f);
        }

        code[Dimension..CodeBytes].Clear();
    }

    /// <summary>Writes the query into <paramref name="padded"/> (<see cref="CodeBytes"/> floats), zeros after <see cref="Dimension"/>.</summary>
    internal void Pad(ReadOnlySpan<float> query, Span<float> padded)
    {
        query[..Dimension].CopyTo(padded);
        padded[Dimension..CodeBytes].Clear();
    }

    /// <summary>The step-sums of a padded query with <paramref name="count"/> consecutive codes.</summary>
    internal void Compute<TStep>(KernelPath path, ref float paddedQuery, ref byte codes, int count, ref float results)
        where TStep : struct, IAccumulateStep
        => ByteCodeKernel.Compute<TStep>(path, ref paddedQuery, ref MemoryMarshal.GetArrayDataReference(_steps), ref MemoryMarshal.GetArrayDataReference(_minimums), ref codes, CodeBytes, count, ref results);

    internal float Single<TStep>(ReadOnlySpan<float> query, ReadOnlySpan<byte> code, KernelPath path = (KernelPath)(-1))
        where TStep : struct, IAccumulateStep
    {
        if (query.Length != Dimension)
        {
            ThrowHelper.ThrowDimensionMismatch(nameof(query), Dimension, query.Length);
        }

        CheckCode(code.Length, nameof(code));
        Span<float> padded = CodeBytes <= 1024 ? stackalloc float[CodeBytes] : new float[CodeBytes];
        Pad(query, padded);
        float result = 0;
        Compute<TStep>(path == (KernelPath)(-1) ? KernelDispatch.Widest : path, ref MemoryMarshal.GetReference(padded), ref MemoryMarshal.GetReference(code), 1, ref result);
        return result;
    }

    private void CheckCode(int length, string paramName)
    {
        if (length < CodeBytes)
        {
            ThrowHelper.ThrowArgument(paramName, $"{paramName} has {length} bytes; codes of this quantizer take {CodeBytes}.");
        }
    }
}

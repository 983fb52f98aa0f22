namespace VectorKit.Internal;

/// <summary>An index's byte codes, one fixed-size code per row, in one contiguous, 64-byte-aligned native block (see <see cref="RowBuffer{T}"/>).</summary>
internal sealed class CodeBuffer(int codeBytes, int initialCapacity) : RowBuffer<byte>(codeBytes, initialCapacity);

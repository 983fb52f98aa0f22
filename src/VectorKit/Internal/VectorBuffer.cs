namespace VectorKit.Internal;

/// <summary>An index's float32 vectors in one contiguous, 64-byte-aligned native block (see <see cref="RowBuffer{T}"/>).</summary>
internal sealed class VectorBuffer(int dimension, int initialCapacity) : RowBuffer<float>(dimension, initialCapacity);

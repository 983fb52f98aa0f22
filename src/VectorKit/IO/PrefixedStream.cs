namespace VectorKit.IO;

/// <summary>A read-only stream that yields a few already-consumed bytes before the rest of an inner stream.</summary>
/// <remarks>Lets a reader sniff a magic number on a non-seekable stream and still hand the whole stream on. Never disposes the inner stream.</remarks>
internal sealed class PrefixedStream : Stream
{
    private readonly byte[] _prefix;
    private readonly Stream _inner;
    private int _prefixPos;

    public PrefixedStream(byte[] prefix, Stream inner)
    {
        _prefix = prefix;
        _inner = inner;
    }

    public override bool CanRead => true;

    public override bool CanSeek => false;

    public override bool CanWrite => false;

    public override long Length => throw new NotSupportedException();

    public override long Position
    {
        get => throw new NotSupportedException();
        set => throw new NotSupportedException();
    }

    public override int Read(byte[] buffer, int offset, int count) => Read(buffer.AsSpan(offset, count));

    public override int Read(Span<byte> buffer)
    {
        if (_prefixPos < _prefix.Length && !buffer.IsEmpty)
        {
            int n = Math.Min(buffer.Length, _prefix.Length - _prefixPos);
            _prefix.AsSpan(_prefixPos, n).CopyTo(buffer);
            _prefixPos += n;
            return n;
        }

        return _inner.Read(buffer);
    }

    public override void Flush()
    {
    }

    public override long Seek(long offset, SeekOrigin origin) => throw new NotSupportedException();

    public override void SetLength(long value) => throw new NotSupportedException();

    public override void Write(byte[] buffer, int offset, int count) => throw new NotSupportedException();
}

namespace VectorKit.Tests.IO;

/// <summary>
/// A read-only, non-seekable stream over bytes that returns at most a few bytes per read, like a slow network
/// source: it exercises the readers' unknown-length and partial-read paths.
/// </summary>
internal sealed class TrickleStream(byte[] data, int maxPerRead = 5) : Stream
{
    private int _pos;

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
        int n = Math.Min(Math.Min(buffer.Length, maxPerRead), data.Length - _pos);
        data.AsSpan(_pos, n).CopyTo(buffer);
        _pos += n;
        return n;
    }

    public override void Flush()
    {
    }

    public override long Seek(long offset, SeekOrigin origin) => throw new NotSupportedException();

    public override void SetLength(long value) => throw new NotSupportedException();

    public override void Write(byte[] buffer, int offset, int count) => throw new NotSupportedException();
}

namespace VectorKit.SaveChild;

/// <summary>
/// Passes writes through until <c>pauseAt</c> bytes are written (or, when <c>pauseAt</c> is -1, until the save
/// flushes), then tells the parent on standard output and blocks for good, waiting to be killed.
/// </summary>
internal sealed class PausingStream(Stream inner, long pauseAt) : Stream
{
    private long _written;

    public override bool CanRead => false;

    public override bool CanSeek => false;

    public override bool CanWrite => true;

    public override long Length => throw new NotSupportedException();

    public override long Position
    {
        get => throw new NotSupportedException();
        set => throw new NotSupportedException();
    }

    public override void Write(ReadOnlySpan<byte> buffer)
    {
        if (pauseAt >= 0 && _written + buffer.Length >= pauseAt)
        {
            inner.Write(buffer[..(int)(pauseAt - _written)]);
            Pause();
        }

        inner.Write(buffer);
        _written += buffer.Length;
    }

    public override void Write(byte[] buffer, int offset, int count) => Write(buffer.AsSpan(offset, count));

    public override void Flush()
    {
        inner.Flush();
        if (pauseAt < 0)
        {
            Pause();
        }
    }

    public override int Read(byte[] buffer, int offset, int count) => throw new NotSupportedException();

    public override long Seek(long offset, SeekOrigin origin) => throw new NotSupportedException();

    public override void SetLength(long value) => throw new NotSupportedException();

    private static void Pause()
    {
        Console.Out.WriteLine("paused");
        Console.Out.Flush();
        Thread.Sleep(Timeout.Infinite);
    }
}

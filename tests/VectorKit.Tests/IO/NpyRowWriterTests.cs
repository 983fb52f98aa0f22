using System.Text;
using VectorKit.IO;
using Xunit;

namespace VectorKit.Tests.IO;

/// <summary>
/// <see cref="NpyRowWriter"/>: the header is checked byte by byte against the .npy layout (NEP 1: magic, version 1.0,
/// uint16 header length, dict padded with spaces and ended by a newline, data at a multiple of 64), and the rows are
/// read back by the library's reader and by <see cref="FileVectorSource"/>.
/// </summary>
public sealed class NpyRowWriterTests : IDisposable
{
    private readonly string _directory = Directory.CreateTempSubdirectory("vk-npywriter-").FullName;

    public void Dispose() => Directory.Delete(_directory, recursive: true);

    [Fact]
    public void RowsAppendedInBatches_ReadBack_WithTheCountInTheHeader()
    {
        const int D = 5;
        string path = Path.Combine(_directory, "rows.npy");
        float[] data = Enumerable.Range(0, 23 * D).Select(i => (i * 0.37f) - 9f).ToArray();
        using (NpyRowWriter writer = NpyRowWriter.Create(path, D))
        {
            writer.Append(data.AsSpan(0, 10 * D));
            writer.Append([]);
            writer.Append(data.AsSpan(10 * D, 13 * D));
            Assert.Equal(23, writer.RowsWritten);
            writer.Complete();
            Assert.Throws<InvalidOperationException>(() => writer.Append(data.AsSpan(0, D)));
            Assert.Throws<InvalidOperationException>(() => writer.Complete());
        }

        byte[] bytes = File.ReadAllBytes(path);
        Assert.Equal(128 + (data.Length * 4), bytes.Length);
        Assert.Equal(new byte[] { 0x93, (byte)'N', (byte)'U', (byte)'M', (byte)'P', (byte)'Y', 1, 0, 118, 0 }, bytes[..10]);
        string header = Encoding.ASCII.GetString(bytes, 10, 118);
        Assert.StartsWith("{'descr': '<f4', 'fortran_order': False, 'shape': (23, 5), }", header, StringComparison.Ordinal);
        Assert.EndsWith(" \n", header, StringComparison.Ordinal);

        Assert.Equal(data, NpyFile.ReadVectors(path).Data);
        using FileVectorSource source = FileVectorSource.OpenNpy(path);
        var row = new float[D];
        Assert.True(source.TryGetVector(22, row));
        Assert.Equal(data[(22 * D)..], row);
    }

    [Fact]
    public void AWriterNotCompleted_LeavesNoFile_AndArgumentsAreChecked()
    {
        string path = Path.Combine(_directory, "partial.npy");
        using (NpyRowWriter writer = NpyRowWriter.Create(path, 3))
        {
            writer.Append([1f, 2f, 3f]);
            Assert.Equal("rows", Assert.Throws<ArgumentException>(() => writer.Append([1f, 2f])).ParamName);
        }

        Assert.False(File.Exists(path));
        Assert.Empty(Directory.GetFileSystemEntries(_directory));
        Assert.Equal("dimension", Assert.Throws<ArgumentOutOfRangeException>(() => NpyRowWriter.Create(path, 0)).ParamName);
        NpyRowWriter disposed = NpyRowWriter.Create(path, 2);
        disposed.Dispose();
        Assert.Throws<ObjectDisposedException>(() => disposed.Append([1f, 2f]));
    }
}

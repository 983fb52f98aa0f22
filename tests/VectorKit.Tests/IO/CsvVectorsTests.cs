using FsCheck;
using FsCheck.Xunit;
using VectorKit.IO;
using Xunit;

namespace VectorKit.Tests.IO;

public sealed class CsvVectorsTests
{
    [Fact]
    public void Reads_invariant_culture_numbers_and_skips_header_and_blank_lines()
    {
        const string Text = "a,b,c\n1.5, -2 ,3e2\n\n  \n0.25,NaN,-Infinity\n";
        VectorSet set = CsvVectors.Read(new StringReader(Text), new CsvVectorOptions { HasHeader = true });

        Assert.Equal(2, set.Count);
        Assert.Equal(3, set.Dimension);
        Assert.Equal([1.5f, -2f, 300f], set.Row(0).ToArray());
        Assert.Equal(0.25f, set.Row(1)[0]);
        Assert.True(float.IsNaN(set.Row(1)[1]));
        Assert.Equal(float.NegativeInfinity, set.Row(1)[2]);
    }

    [Fact]
    public void Semicolon_separator_allows_no_confusion_with_decimals()
    {
        VectorSet set = CsvVectors.Read(new StringReader("1.5;2\r\n3;4.75\r\n"), new CsvVectorOptions { Separator = ';' });
        Assert.Equal([1.5f, 2f, 3f, 4.75f], set.Data);
    }

    [Fact]
    public void Separator_that_belongs_to_numbers_is_rejected()
    {
        Assert.Throws<ArgumentOutOfRangeException>(() => new CsvVectorOptions { Separator = '.' });
        Assert.Throws<ArgumentOutOfRangeException>(() => new CsvVectorOptions { Separator = '7' });
    }

    [Fact]
    public void Empty_text_reads_as_no_rows()
    {
        VectorSet set = CsvVectors.Read(new StringReader(""));
        Assert.Equal(0, set.Count);
    }

    [Fact]
    public void Writer_emits_header_and_shortest_round_trip_text()
    {
        var writer = new StringWriter { NewLine = "\n" };
        CsvVectors.Write(writer, [0.1f, -2f, 1e-7f, 3f], 2, new CsvVectorOptions { HasHeader = true });
        Assert.Equal("x0,x1\n0.1,-2\n1E-07,3\n", writer.ToString());
    }

    [Fact]
    public void Arguments_are_validated()
    {
        Assert.Throws<ArgumentNullException>(() => CsvVectors.Read((TextReader)null!));
        Assert.Throws<ArgumentNullException>(() => CsvVectors.Write(null!, [1f], 1));
        Assert.Throws<ArgumentOutOfRangeException>(() => CsvVectors.Write(new StringWriter(), [1f], 0));
        Assert.Throws<ArgumentException>(() => CsvVectors.Write(new StringWriter(), [1f, 2f, 3f], 2));
    }

    [Property(MaxTest = 80)]
    public void Round_trips_every_float_including_specials(PositiveInt dimensionSeed, float[] values, bool semicolon, bool header)
    {
        int dimension = 1 + (dimensionSeed.Get % 9);
        float[] data = (values ?? [])[..((values?.Length ?? 0) / dimension * dimension)];
        var options = new CsvVectorOptions { Separator = semicolon ? ';' : ',', HasHeader = header };
        var writer = new StringWriter();
        CsvVectors.Write(writer, data, dimension, options);

        VectorSet back = CsvVectors.Read(new StringReader(writer.ToString()), options);

        Assert.Equal(data.Length / dimension, back.Count);
        Assert.Equal(data.Select(Canonical), back.Data.Select(Canonical));
    }

    // Text keeps the value and the sign of zero but not a NaN's payload bits.
    private static int Canonical(float value) => float.IsNaN(value) ? -1 : BitConverter.SingleToInt32Bits(value);
}

using System.Buffers.Binary;

namespace VectorKit.Cli.Tests;

/// <summary>Writes and reads the .fvecs/.ivecs layout directly (int32 dimension, then the values, per row): the tests' own reader, independent of the library's.</summary>
internal static class TestFiles
{
    public static void WriteFvecs(string path, float[][] rows)
    {
        using var stream = File.Create(path);
        Span<byte> four = stackalloc byte[4];
        foreach (float[] row in rows)
        {
            BinaryPrimitives.WriteInt32LittleEndian(four, row.Length);
            stream.Write(four);
            foreach (float value in row)
            {
                BinaryPrimitives.WriteSingleLittleEndian(four, value);
                stream.Write(four);
            }
        }
    }

    public static int[][] ReadIvecs(string path)
    {
        byte[] bytes = File.ReadAllBytes(path);
        var rows = new List<int[]>();
        int at = 0;
        while (at < bytes.Length)
        {
            int dimension = BinaryPrimitives.ReadInt32LittleEndian(bytes.AsSpan(at));
            at += 4;
            var row = new int[dimension];
            for (int i = 0; i < dimension; i++, at += 4)
            {
                row[i] = BinaryPrimitives.ReadInt32LittleEndian(bytes.AsSpan(at));
            }

            rows.Add(row);
        }

        return [.. rows];
    }

    public static float[][] Random(int rows, int dimension, int seed)
    {
        var random = new Random(seed);
        return [.. Enumerable.Range(0, rows).Select(_ => Enumerable.Range(0, dimension).Select(_ => (float)random.NextDouble()).ToArray())];
    }
}

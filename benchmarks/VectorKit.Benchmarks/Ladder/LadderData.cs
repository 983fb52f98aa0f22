using System.Buffers.Binary;
using VectorKit.IO;

namespace VectorKit.Benchmarks.Ladder;

/// <summary>
/// The ladder's data: Gaussian clusters (spread 0.2) around centres uniform in [−1, 1]ᵈ, one cluster per 100 rows,
/// written to disk in blocks so no rung holds its vectors in memory. Every block draws from its own seeded generator,
/// so a file is the same whatever the block size of the reader; queries draw from the same centres with another seed.
/// </summary>
internal static class LadderData
{
    public const float Spread = 0.2f;
    private const int Seed = 101;
    private const int RowsPerDraw = 65_536;

    public static int Clusters(long count) => (int)Math.Clamp(count / 100, 1, 1_000_000);

    /// <summary>Writes the data and query files unless both are there already (a rung's data is cached between runs).</summary>
    public static void Write(string dataPath, string queryPath, long count, int dimension, int queries)
    {
        if (File.Exists(dataPath) && File.Exists(queryPath))
        {
            Console.Error.WriteLine($"data: {dataPath} exists; reused");
            return;
        }

        float[] centres = Centres(Clusters(count), dimension);
        WriteRows(dataPath, centres, count, dimension, Seed);
        WriteRows(queryPath, centres, queries, dimension, Seed + 1_000_003);
    }

    private static float[] Centres(int clusters, int dimension)
    {
        var random = new Random(Seed);
        var centres = new float[(long)clusters * dimension];
        for (long i = 0; i < centres.LongLength; i++)
        {
            centres[i] = (float)((random.NextDouble() * 2) - 1);
        }

        return centres;
    }

    private static void WriteRows(string path, float[] centres, long count, int d, int seed)
    {
        int clusters = (int)(centres.LongLength / d);
        var block = new float[RowsPerDraw * d];
        bool npy = path.EndsWith(".npy", StringComparison.Ordinal);
        using NpyRowWriter? npyWriter = npy ? NpyRowWriter.Create(path, d) : null;
        string temporary = path + ".partial";
        using FileStream? fvecs = npy ? null : new FileStream(temporary, FileMode.Create, FileAccess.Write, FileShare.None, 1 << 20);
        byte[] row = new byte[4 + (4 * d)];
        long next = 0;
        for (long start = 0; start < count; start += RowsPerDraw)
        {
            int rows = (int)Math.Min(RowsPerDraw, count - start);
            var random = new Random(HashCode.Combine(seed, start / RowsPerDraw));
            for (int r = 0; r < rows; r++)
            {
                int c = random.Next(clusters);
                for (int j = 0; j < d; j++)
                {
                    block[(r * d) + j] = centres[((long)c * d) + j] + (Spread * Gaussian(random));
                }
            }

            if (npyWriter is not null)
            {
                npyWriter.Append(block.AsSpan(0, rows * d));
            }
            else
            {
                for (int r = 0; r < rows; r++)
                {
                    BinaryPrimitives.WriteInt32LittleEndian(row, d);
                    for (int j = 0; j < d; j++)
                    {
                        BinaryPrimitives.WriteSingleLittleEndian(row.AsSpan(4 + (4 * j)), block[(r * d) + j]);
                    }

                    fvecs!.Write(row);
                }
            }

            next += rows;
            if (count >= 10_000_000 && (start / RowsPerDraw) % 100 == 0)
            {
                Console.Error.WriteLine($"data: {next:N0} of {count:N0} rows written");
            }
        }

        if (npyWriter is not null)
        {
            npyWriter.Complete();
        }
        else
        {
            fvecs!.Dispose();
            File.Move(temporary, path, overwrite: true);
        }
    }

    private static float Gaussian(Random random)
    {
        // Box–Muller; 1 − U keeps the logarithm's argument in (0, 1].
        double u = 1.0 - random.NextDouble();
        double v = random.NextDouble();
        return (float)(Math.Sqrt(-2.0 * Math.Log(u)) * Math.Cos(2.0 * Math.PI * v));
    }
}

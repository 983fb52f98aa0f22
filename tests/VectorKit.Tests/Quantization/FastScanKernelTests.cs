using VectorKit.Distance.Kernels;
using VectorKit.Quantization;
using static VectorKit.Tests.Distance.KernelOracle;

namespace VectorKit.Tests.Quantization;

/// <summary>
/// The four-bit fast scan on every kernel path against a naive reference: per entry, the sum over sub-spaces of the
/// level its nibble names, read from codes laid out here by the documented block rule (not by the code under test).
/// </summary>
[Trait("Category", "Kernels")]
public class FastScanKernelTests
{
    public static TheoryData<int> CodeSizes => new() { 1, 2, 3, 4, 5, 8, 16, 17, 32, 64 };

    [Theory]
    [MemberData(nameof(CodeSizes))]
    public void ScanOnEveryPath_MatchesTheNaiveSumOfLevels(int codeBytes)
    {
        foreach (int entries in new[] { 1, 31, 32, 33, 64, 100, 256 })
        {
            var random = new Random((codeBytes * 1000) + entries);
            int subspaces = 2 * codeBytes;
            int top = FastScanKernel.MaxLevel(subspaces);
            var levels = new byte[subspaces * 16];
            for (int i = 0; i < levels.Length; i++)
            {
                levels[i] = (byte)random.Next(top + 1);
            }

            var codes = new byte[entries * codeBytes];
            random.NextBytes(codes);
            byte[] blocks = ReferenceBlocks(codes, entries, codeBytes);
            int[] expected = ReferenceSums(levels, codes, entries, codeBytes);
            foreach (KernelPath path in Paths())
            {
                ushort[] sums = RunScan(path, levels, blocks, codeBytes, entries);
                for (int e = 0; e < entries; e++)
                {
                    Assert.True(expected[e] == sums[e], $"path {path}, {codeBytes} code bytes, {entries} entries: entry {e} sums to {sums[e]}, expected {expected[e]}");
                }
            }
        }
    }

    [Fact]
    public void SumsBeyondSixteenBits_SaturateOnEveryPath()
    {
        // 300 sub-spaces at level 255 would sum to 76,500; the tables never get there (MaxLevel), the kernel clips anyway.
        const int codeBytes = 150;
        var levels = new byte[2 * codeBytes * 16];
        Array.Fill(levels, (byte)255);
        var codes = new byte[40 * codeBytes];
        new Random(5).NextBytes(codes);
        for (int i = 0; i < 16; i++)
        {
            // One sub-space pair of entry 0 at level 0 leaves 298 × 255 = 75,990: still saturated.
            levels[i] = 0;
        }

        byte[] blocks = ReferenceBlocks(codes, 40, codeBytes);
        foreach (KernelPath path in Paths())
        {
            ushort[] sums = RunScan(path, levels, blocks, codeBytes, 40);
            Assert.All(sums.Take(40), s => Assert.Equal(ushort.MaxValue, s));
        }
    }

    [Fact]
    public void PutAndGet_FollowTheDocumentedBlockLayout()
    {
        const int codeBytes = 3;
        const int entries = 70;
        var codes = new byte[entries * codeBytes];
        new Random(2).NextBytes(codes);
        var blocks = new byte[FastScanKernel.ListBytes(entries, codeBytes)];
        Assert.Equal(3 * 32 * codeBytes, blocks.Length);
        for (int e = 0; e < entries; e++)
        {
            FastScanKernel.Put(blocks, codeBytes, e, codes.AsSpan(e * codeBytes, codeBytes));
        }

        Assert.Equal(ReferenceBlocks(codes, entries, codeBytes), blocks);
        var code = new byte[codeBytes];
        for (int e = 0; e < entries; e++)
        {
            FastScanKernel.Get(blocks, codeBytes, e, code);
            Assert.Equal(codes.AsSpan(e * codeBytes, codeBytes).ToArray(), code);
        }
    }

    [Theory]
    [InlineData(4)]
    [InlineData(64)]
    [InlineData(300)]
    public void QuantizedTable_FollowsTheRoundingRuleAndBoundsTheError(int subspaces)
    {
        var random = new Random(subspaces);
        var table = new float[subspaces * 16];
        for (int i = 0; i < table.Length; i++)
        {
            // Rows with different offsets and ranges; one flat row.
            int m = i / 16;
            table[i] = m == 1 ? 7.5f : (float)((m * 0.3) + (random.NextDouble() * (1 + (m % 5))));
        }

        var levels = new byte[table.Length];
        (float bias, float step) = FastScanKernel.QuantizeTable(table, subspaces, levels);

        // The rule, in double: per row its minimum; one step, the widest range over the largest level.
        int top = Math.Min(255, 65535 / subspaces);
        double range = 0, expectedBias = 0;
        var minimum = new double[subspaces];
        for (int m = 0; m < subspaces; m++)
        {
            minimum[m] = table.Skip(m * 16).Take(16).Min();
            range = Math.Max(range, table.Skip(m * 16).Take(16).Max() - minimum[m]);
            expectedBias += minimum[m];
        }

        double expectedStep = range / top;
        Assert.Equal(expectedStep, step, expectedStep * 1e-5);
        Assert.Equal(expectedBias, bias, Math.Abs(expectedBias) * 1e-5);
        Assert.True(levels.Max() <= top);
        for (int i = 0; i < table.Length; i++)
        {
            double exact = (table[i] - minimum[i / 16]) / expectedStep;
            Assert.True(Math.Abs(levels[i] - exact) <= 0.5 + 1e-3, $"entry {i}: level {levels[i]} for {exact:F4} steps");
        }

        // Any code's estimate is within half a step per sub-space of its float sum.
        for (int trial = 0; trial < 50; trial++)
        {
            double sum = 0;
            long levelSum = 0;
            for (int m = 0; m < subspaces; m++)
            {
                int j = random.Next(16);
                sum += table[(m * 16) + j];
                levelSum += levels[(m * 16) + j];
            }

            Assert.True(Math.Abs(bias + (step * levelSum) - sum) <= (subspaces * expectedStep * 0.5) + 1e-3);
        }
    }

    [Fact]
    public void EachPathRunsItsOwnInstructions_WhereTheTestScriptExpectsIt()
    {
        // Under the AVX2/SSE/scalar reruns the widest path narrows; on x86 every path that runs has its byte shuffle.
        foreach (KernelPath path in Paths())
        {
            if (System.Runtime.Intrinsics.X86.Ssse3.IsSupported)
            {
                Assert.Equal(path, FastScanKernel.Effective(path));
            }
        }

        string? expected = Environment.GetEnvironmentVariable("VECTORKIT_EXPECT_PATH");
        if (expected is not null)
        {
            Assert.Equal(expected, FastScanKernel.Effective(KernelDispatch.Widest).ToString());
        }
    }

    [Fact]
    public void AtMostOnEveryPath_MarksExactlyTheSumsWithinTheLimit()
    {
        var random = new Random(17);
        var sums = new ushort[FastScanKernel.BlockSize];
        foreach (ushort limit in new ushort[] { 0, 1, 255, 256, 30_000, 65_534, 65_535 })
        {
            for (int round = 0; round < 20; round++)
            {
                for (int i = 0; i < sums.Length; i++)
                {
                    // Values around the limit as well as anywhere, so both sides of the comparison are exercised.
                    sums[i] = (ushort)(random.Next(3) == 0 ? Math.Clamp(limit + random.Next(-2, 3), 0, 65_535) : random.Next(65_536));
                }

                uint expected = 0;
                for (int i = 0; i < sums.Length; i++)
                {
                    expected |= sums[i] <= limit ? 1u << i : 0;
                }

                foreach (KernelPath path in Paths())
                {
                    Assert.True(expected == FastScanKernel.AtMost(path, ref sums[0], limit), $"path {path}, limit {limit}, round {round}");
                }
            }
        }
    }

    [Theory]
    [InlineData(0f, 0.01f, 1f)]
    [InlineData(-3.5f, 0.125f, 2.75f)]
    [InlineData(1000f, 1e-6f, 1000.0001f)]
    [InlineData(1000f, 1e-9f, 1000f)]
    [InlineData(5f, 0.5f, 4.9f)]
    [InlineData(5f, 0f, 6f)]
    [InlineData(2f, 1e-4f, 1e9f)]
    [InlineData(2f, 1e-4f, float.PositiveInfinity)]
    public void SumLimit_IsTheLargestSumWhoseEstimatePassesTheBound(float start, float step, float bound)
    {
        // Brute force over every 16-bit sum with the scan's own arithmetic: estimates grow with the sum.
        int expected = -1;
        for (int sum = 0; sum <= ushort.MaxValue; sum++)
        {
            if (start + (step * sum) <= bound)
            {
                expected = sum;
            }
        }

        Assert.Equal(expected, FastScanKernel.SumLimit(bound, start, step));
    }

    [Fact]
    public void SumLimit_MatchesBruteForceOnRandomBounds()
    {
        var random = new Random(23);
        for (int round = 0; round < 300; round++)
        {
            float start = (float)((random.NextDouble() * 200) - 100);
            float step = (float)Math.Pow(10, (random.NextDouble() * 8) - 7);
            float bound = start + (step * random.Next(-10, 70_000)) + (float)(random.NextDouble() * step);
            int expected = -1;
            for (int sum = 0; sum <= ushort.MaxValue; sum++)
            {
                if (start + (step * sum) <= bound)
                {
                    expected = sum;
                }
            }

            Assert.True(expected == FastScanKernel.SumLimit(bound, start, step), $"start {start:R}, step {step:R}, bound {bound:R}");
        }
    }

    private static ushort[] RunScan(KernelPath path, byte[] levels, byte[] blocks, int codeBytes, int entries)
    {
        var image = new byte[codeBytes * FastScanKernel.ImageBytesPerCodeByte];
        FastScanKernel.PrepareImage(path, levels, codeBytes, image);
        int blockCount = (entries + 31) / 32;
        var sums = new ushort[blockCount * 32];
        FastScanKernel.Scan(path, ref image[0], ref blocks[0], codeBytes, blockCount, ref sums[0]);
        return sums;
    }

    // Column i of block b holds code byte i of the block's 32 entries, entry j at byte j.
    private static byte[] ReferenceBlocks(byte[] codes, int entries, int codeBytes)
    {
        int blockCount = (entries + 31) / 32;
        var blocks = new byte[blockCount * 32 * codeBytes];
        for (int e = 0; e < entries; e++)
        {
            for (int i = 0; i < codeBytes; i++)
            {
                blocks[((e / 32) * 32 * codeBytes) + (i * 32) + (e % 32)] = codes[(e * codeBytes) + i];
            }
        }

        return blocks;
    }

    private static int[] ReferenceSums(byte[] levels, byte[] codes, int entries, int codeBytes)
    {
        var sums = new int[entries];
        for (int e = 0; e < entries; e++)
        {
            int sum = 0;
            for (int m = 0; m < 2 * codeBytes; m++)
            {
                int code = codes[(e * codeBytes) + (m / 2)];
                int nibble = m % 2 == 0 ? code & 15 : code >> 4;
                sum += levels[(m * 16) + nibble];
            }

            sums[e] = Math.Min(sum, 65535);
        }

        return sums;
    }
}

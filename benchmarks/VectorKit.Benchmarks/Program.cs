using System.Globalization;
using BenchmarkDotNet.Running;
using VectorKit.Benchmarks.Indexes;
using VectorKit.Benchmarks.Persistence;

namespace VectorKit.Benchmarks;

/// <summary>
/// Runs the BenchmarkDotNet benchmarks picked by the command line (e.g. <c>--filter '*PairKernel*'</c>), or the graph
/// index's recall-versus-throughput harness: <c>graph-sweep [fashion-mnist directory] [with-8bit]</c> and
/// <c>clustered-sweep [count] [dimension] [with-8bit] [cache=folder]</c> (<c>with-8bit</c> adds the graph under 8-bit codes; <c>cache=</c> saves the built graphs there and loads them in later runs); the graph's build cost against its floor: <c>graph-build-cost [count | fashion-mnist] [dimension] [rounds]</c>; the filtered-search crossover: <c>filter-sweep [fashion-mnist directory]</c>;
/// the re-ranking harness: <c>reranking [items] [hidden width] [baseline queries]</c>; the inverted-file harness,
/// <c>inverted-file-sweep [count] [dimension] [lists] [product code bytes]</c>; the byte and four-bit product-code layouts
/// side by side, <c>fast-scan-sweep fashion-mnist [lists] [code bytes]</c> or
/// <c>fast-scan-sweep clustered [count] [dimension] [lists] [code bytes]</c>; re-scoring from memory vs a file,
/// <c>rescore-source [count] [dimension] [lists] [product code bytes]</c>; the 8-bit exact index harness,
/// <c>exact-scalar-sweep [count] [dimension]</c>; product codes with and without the
/// variance-balancing rotation: <c>product-rotation-sweep [clustered count] [dimension]</c>; and the load-speed harness:
/// <c>storage-load [exact count] [graph count] [dimension]</c>; mapped opening against loading,
/// <c>mapped-open [count] [dimension] [queries] [rounds] [exact|ivf|graph|graph-8bit]</c>; and every index kind side by side at default options on
/// Fashion-MNIST: <c>index-guide [without-default-lists]</c>; search latency during removals, the graph's global pass,
/// compaction, saves and batch searches: <c>maintenance-latency [count] [dimension] [seconds] [kinds] [nice of the searching and writing threads, or rt for real-time scheduling]</c>; the
/// command-line tool's overhead over the library on the Fashion-MNIST batch job: <c>tool-overhead [rounds]</c>; the exact
/// index's batch search against the numpy + OpenBLAS baseline: <c>exact-batch-vs-blas [repetitions] [reference queries] [baseline ids]</c>;
/// recall-targeted tuning of every kind beside its untuned defaults: <c>tuning [fashion-mnist|text|clustered] [target] [cosine|-] [count] [dimension] [kinds]</c>;
/// the ladder of streamed builds from 10³ to 10⁷ rows on disk: <c>ladder [rungs=3,4,5,6,7] [dim=128] [kinds=ivf-fastscan,ivf-pq,graph-8bit] [queries=1000] [format=npy|fvecs] [reads=mapped|positional] [dir=...]</c>.
/// </summary>
public static class Program
{
    public static void Main(string[] args)
    {
        if (args.Length > 0 && args[0] == "exact-batch-vs-blas")
        {
            ExactBatchVsBlas.Run(
                args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 3,
                args.Length > 2 ? int.Parse(args[2], CultureInfo.InvariantCulture) : 200,
                args.Length > 3 ? args[3] : null);
            return;
        }

        if (args.Length > 0 && args[0] == "ladder")
        {
            Ladder.LadderHarness.Run(args);
            return;
        }

        if (args.Length > 0 && args[0] == "ladder-step")
        {
            Ladder.LadderHarness.Step(args);
            return;
        }

        if (args.Length > 0 && args[0] == "graph-build-cost")
        {
            // graph-build-cost [count | fashion-mnist] [dimension] [rounds]
            int rounds = args.Length > 3 ? int.Parse(args[3], CultureInfo.InvariantCulture) : 2;
            if (args.Length > 1 && args[1] == "fashion-mnist")
            {
                GraphBuildCost.RunFashionMnist("/usr/share/datasets/fashion-mnist", rounds);
            }
            else
            {
                GraphBuildCost.RunClustered(
                    args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 100_000,
                    args.Length > 2 ? int.Parse(args[2], CultureInfo.InvariantCulture) : 128,
                    rounds);
            }

            return;
        }

        if (args.Length > 0 && args[0] == "graph-sweep")
        {
            GraphSweep.RunFashionMnist(args.Length > 1 && args[1] != "with-8bit" ? args[1] : "/usr/share/datasets/fashion-mnist", args.Contains("with-8bit"));
            return;
        }

        if (args.Length > 0 && args[0] == "filter-sweep")
        {
            FilterSweep.RunFashionMnist(args.Length > 1 ? args[1] : "/usr/share/datasets/fashion-mnist");
            return;
        }

        if (args.Length > 0 && args[0] == "clustered-sweep")
        {
            int count = args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 1_000_000;
            int dimension = args.Length > 2 ? int.Parse(args[2], CultureInfo.InvariantCulture) : 128;
            GraphSweep.RunClustered(count, dimension, args.Contains("with-8bit"), args.FirstOrDefault(a => a.StartsWith("cache=", StringComparison.Ordinal))?["cache=".Length..]);
            return;
        }

        if (args.Length > 0 && args[0] == "reranking")
        {
            int items = args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 100_000;
            int hidden = args.Length > 2 ? int.Parse(args[2], CultureInfo.InvariantCulture) : 400;
            int baseline = args.Length > 3 ? int.Parse(args[3], CultureInfo.InvariantCulture) : 16;
            Reranking.RerankingHarness.Run(items, hidden, baseline, args.Contains("tuned-codes"));
            return;
        }

        if (args.Length > 0 && args[0] == "inverted-file-sweep")
        {
            int count = args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 1_000_000;
            int dimension = args.Length > 2 ? int.Parse(args[2], CultureInfo.InvariantCulture) : 128;
            int lists = args.Length > 3 ? int.Parse(args[3], CultureInfo.InvariantCulture) : 1024;
            int productBytes = args.Length > 4 ? int.Parse(args[4], CultureInfo.InvariantCulture) : 64;
            InvertedFileSweep.Run(count, dimension, lists, productBytes);
            return;
        }

        if (args.Length > 0 && args[0] == "fast-scan-sweep")
        {
            // fast-scan-sweep fashion-mnist [lists] [code bytes] | fast-scan-sweep clustered [count] [dimension] [lists] [code bytes]
            string set = args.Length > 1 ? args[1] : "fashion-mnist";
            int Arg(int i, int fallback) => args.Length > i ? int.Parse(args[i], CultureInfo.InvariantCulture) : fallback;
            if (set == "clustered")
            {
                FastScanSweep.RunClustered(Arg(2, 1_000_000), Arg(3, 128), Arg(4, 1024), Arg(5, 64));
            }
            else
            {
                FastScanSweep.RunFashionMnist(TestData.FashionDirectory, Arg(2, 256), Arg(3, 56));
            }

            return;
        }

        if (args.Length > 0 && args[0] == "rescore-source")
        {
            int count = args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 200_000;
            int dimension = args.Length > 2 ? int.Parse(args[2], CultureInfo.InvariantCulture) : 128;
            int lists = args.Length > 3 ? int.Parse(args[3], CultureInfo.InvariantCulture) : 512;
            int productBytes = args.Length > 4 ? int.Parse(args[4], CultureInfo.InvariantCulture) : 32;
            RescoreSourceSweep.Run(count, dimension, lists, productBytes);
            return;
        }

        if (args.Length > 0 && args[0] == "exact-scalar-sweep")
        {
            int count = args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 1_000_000;
            int dimension = args.Length > 2 ? int.Parse(args[2], CultureInfo.InvariantCulture) : 128;
            ExactScalarSweep.Run(count, dimension);
            return;
        }

        if (args.Length > 0 && args[0] == "product-rotation-sweep")
        {
            int count = args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 200_000;
            int dimension = args.Length > 2 ? int.Parse(args[2], CultureInfo.InvariantCulture) : 128;
            ProductRotationSweep.Run(count, dimension);
            return;
        }

        if (args.Length > 0 && args[0] == "mapped-open")
        {
            int count = args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 1_000_000;
            int dimension = args.Length > 2 ? int.Parse(args[2], CultureInfo.InvariantCulture) : 128;
            int queries = args.Length > 3 ? int.Parse(args[3], CultureInfo.InvariantCulture) : 20;
            int rounds = args.Length > 4 ? int.Parse(args[4], CultureInfo.InvariantCulture) : 3;
            MappedOpen.Run(count, dimension, queries, rounds, args.Length > 5 ? args[5] : "exact");
            return;
        }

        if (args.Length > 0 && args[0] == "storage-load")
        {
            int exactCount = args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 1_000_000;
            int graphCount = args.Length > 2 ? int.Parse(args[2], CultureInfo.InvariantCulture) : 200_000;
            int dimension = args.Length > 3 ? int.Parse(args[3], CultureInfo.InvariantCulture) : 128;
            StorageLoad.Run(exactCount, graphCount, dimension);
            return;
        }

        if (args.Length > 0 && args[0] == "index-guide")
        {
            IndexGuide.Run(withDefaultLists: !args.Contains("without-default-lists"));
            return;
        }

        if (args.Length > 0 && args[0] == "tuning")
        {
            string dataSet = args.Length > 1 ? args[1] : "fashion-mnist";
            double target = args.Length > 2 ? double.Parse(args[2], CultureInfo.InvariantCulture) : 0.95;
            int count = args.Length > 4 ? int.Parse(args[4], CultureInfo.InvariantCulture) : 1_000_000;
            int dimension = args.Length > 5 ? int.Parse(args[5], CultureInfo.InvariantCulture) : 128;
            string[]? only = args.Length > 6 ? args[6].Split(',') : null;
            TuningBenchmark.Run(dataSet, target, args.Contains("cosine"), count, dimension, only);
            return;
        }

        if (args.Length > 0 && args[0] == "maintenance-latency")
        {
            int count = args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 1_000_000;
            int dimension = args.Length > 2 ? int.Parse(args[2], CultureInfo.InvariantCulture) : 128;
            double seconds = args.Length > 3 ? double.Parse(args[3], CultureInfo.InvariantCulture) : 5;
            string[] kinds = args.Length > 4 ? args[4].Split(',') : ["exact", "graph", "inverted-file"];
            // rt, or rt=<ms>: real-time, the searcher resting 1 ms after every <ms> of searching (4 by default).
            bool realTime = args.Length > 5 && args[5].StartsWith("rt", StringComparison.Ordinal);
            double busy = realTime && args[5].StartsWith("rt=", StringComparison.Ordinal) ? double.Parse(args[5][3..], CultureInfo.InvariantCulture) : 4;
            int foregroundNice = args.Length > 5 && !realTime ? int.Parse(args[5], CultureInfo.InvariantCulture) : 0;
            MaintenanceLatency.Run(count, dimension, seconds, kinds, foregroundNice, realTime, busy);
            return;
        }

        if (args.Length == 4 && args[0] == "tool-overhead-library-job")
        {
            ToolOverhead.RunLibraryJob(args[1], args[2], args[3]);
            return;
        }

        if (args.Length > 0 && args[0] == "tool-overhead")
        {
            ToolOverhead.Run(args.Length > 1 ? int.Parse(args[1], CultureInfo.InvariantCulture) : 3);
            return;
        }

        BenchmarkSwitcher.FromAssembly(typeof(Program).Assembly).Run(args, BenchmarkConfig.Create());
    }
}

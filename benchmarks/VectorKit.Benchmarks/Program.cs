using BenchmarkDotNet.Running;

namespace VectorKit.Benchmarks;

/// <summary>Runs the benchmarks picked by the command line, e.g. <c>--filter '*PairKernel*'</c>.</summary>
public static class Program
{
    public static void Main(string[] args)
        => BenchmarkSwitcher.FromAssembly(typeof(Program).Assembly).Run(args, BenchmarkConfig.Create());
}

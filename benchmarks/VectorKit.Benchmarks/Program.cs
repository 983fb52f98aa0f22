using VectorKit.Benchmarks.Indexes;

namespace VectorKit.Benchmarks;

/// <summary>Entry point: <c>graph-sweep</c> runs the graph index's recall-versus-throughput harness.</summary>
public static class Program
{
    public static void Main(string[] args)
    {
        if (args.Length > 0 && args[0] == "graph-sweep")
        {
            GraphSweep.Run(args.Length > 1 ? args[1] : "/usr/share/datasets/fashion-mnist");
            return;
        }

        Console.WriteLine("usage: graph-sweep [fashion-mnist directory]");
    }
}

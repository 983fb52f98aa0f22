namespace VectorKit.Cli;

internal static class Program
{
    public static int Main(string[] args) => CliApp.Run(args, Console.Out, Console.Error);
}

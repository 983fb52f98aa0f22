namespace VectorKit.Cli.Commands; internal static class DemoCommand { public static System.CommandLine.Command Create(CommandContext c) => new("demo"); }

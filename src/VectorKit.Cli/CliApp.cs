using System.CommandLine;
using System.Runtime.InteropServices;
using Spectre.Console;
using VectorKit.Cli.Commands;

namespace VectorKit.Cli;

/// <summary>The command tree and the one place where failures become exit codes and one-line messages.</summary>
internal static class CliApp
{
    public static readonly Option<bool> Quiet = new("--quiet") { Description = "No progress output.", Recursive = true };

    public static readonly Option<bool> Verbose = new("--verbose") { Description = "Print stack traces of unexpected errors.", Recursive = true };

    public static readonly Option<bool> UntrustedIndex = new("--untrusted-index")
    {
        Description = "Load index files with the library's caps for files from elsewhere (dimension, count, links, 2 GiB per section).",
        Recursive = true,
    };

    public static RootCommand BuildRoot(TextWriter output, TextWriter error)
    {
        var root = new RootCommand("vectorkit: offline batch nearest-neighbour jobs with VectorKit (build, search, evaluate, tune, inspect, plot).");
        root.Options.Add(Quiet);
        root.Options.Add(Verbose);
        root.Options.Add(UntrustedIndex);
        var context = new CommandContext(output, error);
        root.Subcommands.Add(BuildCommand.Create(context));
        root.Subcommands.Add(SearchCommand.Create(context));
        root.Subcommands.Add(EvaluateCommand.Create(context));
        root.Subcommands.Add(TuneCommand.Create(context));
        root.Subcommands.Add(InspectCommand.Create(context));
        root.Subcommands.Add(PlotCommand.Create(context));
        root.Subcommands.Add(DemoCommand.Create(context));
        return root;
    }

    /// <summary>Parses and runs; returns the exit code. Used by <c>Main</c> and by in-process tests.</summary>
    public static int Run(string[] args, TextWriter output, TextWriter error)
    {
        RootCommand root = BuildRoot(output, error);
        ParseResult parsed = root.Parse(args);
        if (parsed.Errors.Count > 0)
        {
            foreach (var problem in parsed.Errors)
            {
                error.WriteLine($"vectorkit: error: {problem.Message}");
            }

            error.WriteLine("Run 'vectorkit --help' (or 'vectorkit <command> --help') for the options.");
            return ExitCodes.BadArguments;
        }

        using var stop = new CancellationTokenSource();
        void OnSignal(PosixSignalContext signal)
        {
            // Keep the process alive so the command can delete its temporary files and report what was done.
            signal.Cancel = true;
            if (!stop.IsCancellationRequested)
            {
                error.WriteLine("vectorkit: stopping (finishing the current block)...");
            }

            stop.Cancel();
        }

        using PosixSignalRegistration interrupt = PosixSignalRegistration.Create(PosixSignal.SIGINT, OnSignal);
        using PosixSignalRegistration terminate = PosixSignalRegistration.Create(PosixSignal.SIGTERM, OnSignal);
        CommandContext.Current = stop.Token;
        bool verbose = parsed.GetValue(Verbose);
        try
        {
            return parsed.Invoke(new InvocationConfiguration { EnableDefaultExceptionHandler = false, ProcessTerminationTimeout = null, Output = output, Error = error });
        }
        catch (Exception e)
        {
            return Report(e, error, verbose);
        }
    }

    /// <summary>One line per failure, the right exit code, and a stack trace only for bugs under --verbose.</summary>
    public static int Report(Exception e, TextWriter error, bool verbose)
    {
        switch (e)
        {
            case OperationCanceledException:
                error.WriteLine("vectorkit: cancelled; nothing was written under the final output names.");
                return ExitCodes.Cancelled;
            case UsageException:
                error.WriteLine($"vectorkit: error: {e.Message}");
                return ExitCodes.BadArguments;
            case InputFileException:
                error.WriteLine($"vectorkit: error: {OneLine(e.Message)}");
                return ExitCodes.BadInput;
            case OutputFileException:
                error.WriteLine($"vectorkit: error: {OneLine(e.Message)}");
                return ExitCodes.OutputFailed;
            case IOException or UnauthorizedAccessException:
                // Saving an index: the library names the target and the step.
                error.WriteLine($"vectorkit: error: {OneLine(e.Message)}");
                return ExitCodes.OutputFailed;
            case OutOfMemoryException:
                error.WriteLine("vectorkit: error: out of memory; use a compressed storage variant (--storage 8bit or product-codes) or a smaller data set.");
                return ExitCodes.InternalError;
            default:
                error.WriteLine($"vectorkit: unexpected error ({e.GetType().Name}): {OneLine(e.Message)}");
                if (verbose)
                {
                    error.WriteLine(e.ToString());
                }
                else
                {
                    error.WriteLine("Run again with --verbose for the stack trace, and please report it.");
                }

                return ExitCodes.InternalError;
        }
    }

    private static string OneLine(string message) => message.ReplaceLineEndings(" ");
}

/// <summary>What every command needs: the output writers, a console for tables, the stop token.</summary>
internal sealed class CommandContext(TextWriter output, TextWriter error)
{
    public static CancellationToken Current { get; set; }

    public TextWriter Output { get; } = output;

    public TextWriter Error { get; } = error;

    public CancellationToken Stop => Current;

    /// <summary>A console for tables on the output writer; plain characters when it is not a terminal.</summary>
    public IAnsiConsole Tables()
    {
        bool terminal = ReferenceEquals(Output, Console.Out) && !Console.IsOutputRedirected;
        return AnsiConsole.Create(new AnsiConsoleSettings
        {
            Out = new AnsiConsoleOutput(Output),
            Ansi = terminal ? AnsiSupport.Detect : AnsiSupport.No,
            ColorSystem = terminal ? ColorSystemSupport.Detect : ColorSystemSupport.NoColors,
            Interactive = terminal ? InteractionSupport.Detect : InteractionSupport.No,
        });
    }

    public ProgressLine Progress(ParseResult parsed, string what, string unit, long total)
        => new(what, unit, total, Error, parsed.GetValue(CliApp.Quiet));
}

namespace VectorKit.Cli;

/// <summary>The tool's exit codes; documented in docs/command-line.md and stable across versions.</summary>
internal static class ExitCodes
{
    public const int Success = 0;

    /// <summary>A failure the tool did not expect (a bug): the message and, with <c>--verbose</c>, the stack trace.</summary>
    public const int InternalError = 1;

    /// <summary>Bad command-line arguments: an unknown option, a missing value, k ≤ 0, a malformed range.</summary>
    public const int BadArguments = 2;

    /// <summary>An input file is missing, unreadable, damaged, truncated, or does not fit the job (dimension mismatch).</summary>
    public const int BadInput = 3;

    /// <summary>An output could not be written (folder missing, no permission, disk full).</summary>
    public const int OutputFailed = 4;

    /// <summary><c>tune</c>: no setting in the sweep reached the recall target.</summary>
    public const int TargetNotReached = 5;

    /// <summary>Stopped by Ctrl+C (SIGINT) or SIGTERM; nothing was written under a final output name (128 + SIGINT, as shells report it).</summary>
    public const int Cancelled = 130;
}

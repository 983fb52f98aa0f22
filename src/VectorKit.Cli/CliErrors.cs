namespace VectorKit.Cli;

/// <summary>A bad argument found after parsing (a value out of range, options that do not go together); exit code 2.</summary>
internal sealed class UsageException(string message) : Exception(message);

/// <summary>An input file that cannot be used, with the file and, where known, the byte offset; exit code 3.</summary>
internal sealed class InputFileException(string path, string reason, Exception? inner = null)
    : Exception($"bad input file '{path}': {reason}", inner)
{
    public string Path { get; } = path;
}

/// <summary>An output that could not be written; exit code 4. Nothing is left under the final name.</summary>
internal sealed class OutputFileException(string path, string reason, Exception? inner = null)
    : Exception($"cannot write '{path}': {reason}", inner);

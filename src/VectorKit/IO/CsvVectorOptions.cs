namespace VectorKit.IO;

/// <summary>How <see cref="CsvVectors"/> splits and labels CSV text. Immutable; may be shared.</summary>
public sealed class CsvVectorOptions
{
    private readonly char _separator = ',';

    /// <summary>Comma-separated, no header line.</summary>
    public static CsvVectorOptions Default { get; } = new();

    /// <summary>The character between values on a line. Defaults to ','.</summary>
    /// <exception cref="ArgumentOutOfRangeException">
    /// The value could be part of a number (a digit, '.', '+', '-', 'e', 'E') or is a line break.
    /// </exception>
    public char Separator
    {
        get => _separator;
        init
        {
            // Numbers are parsed in the invariant culture, so these characters belong to the values themselves.
            if (char.IsAsciiDigit(value) || value is '.' or '+' or '-' or 'e' or 'E' or '\n' or '\r')
            {
                DataFormatThrow.ArgumentOutOfRange(nameof(Separator), value, "must not be a digit, '.', '+', '-', 'e', 'E' or a line break");
            }

            _separator = value;
        }
    }

    /// <summary>
    /// Whether the first line is a header. Reading skips it; writing emits one (<c>x0,x1,...</c>). Defaults to false.
    /// </summary>
    public bool HasHeader { get; init; }
}

namespace VectorKit.IO;

/// <summary>
/// Parses the header of a .npy file: a Python dictionary literal with exactly the keys 'descr' (a string),
/// 'fortran_order' (True or False) and 'shape' (a tuple of non-negative integers).
/// </summary>
/// <remarks>
/// Only the literal forms a .npy header uses are accepted: single- or double-quoted strings without escapes,
/// True/False, and tuples of decimal integers (an old trailing 'L' is tolerated). Unknown, duplicate or missing
/// keys are rejected, as is anything but whitespace after the closing brace.
/// </remarks>
internal ref struct NpyHeaderParser
{
    private const string Format = "npy";
    private readonly ReadOnlySpan<char> _text;
    private readonly long _baseOffset;
    private int _pos;

    private NpyHeaderParser(ReadOnlySpan<char> text, long baseOffset)
    {
        _text = text;
        _baseOffset = baseOffset;
    }

    /// <summary>Parses a header; <paramref name="baseOffset"/> is the file offset of its first character, for messages.</summary>
    public static void Parse(ReadOnlySpan<char> text, long baseOffset, out string descr, out bool fortranOrder, out long[] shape)
    {
        var parser = new NpyHeaderParser(text, baseOffset);
        string? d = null;
        bool? f = null;
        long[]? s = null;
        parser.Expect('{');
        while (!parser.TryConsume('}'))
        {
            long keyOffset = parser.Offset;
            string key = parser.ReadString();
            parser.Expect(':');
            switch (key)
            {
                case "descr" when d is null:
                    d = parser.ReadString();
                    break;
                case "fortran_order" when f is null:
                    f = parser.ReadBool();
                    break;
                case "shape" when s is null:
                    s = parser.ReadTuple();
                    break;
                case "descr" or "fortran_order" or "shape":
                    DataFormatThrow.Malformed(Format, $"the header repeats the key '{key}'", keyOffset);
                    break;
                default:
                    DataFormatThrow.Malformed(Format, $"the header has the unknown key '{key}'; expected only 'descr', 'fortran_order' and 'shape'", keyOffset);
                    break;
            }

            if (!parser.TryConsume(','))
            {
                parser.Expect('}');
                break;
            }
        }

        parser.SkipSpace();
        if (parser._pos != text.Length)
        {
            DataFormatThrow.Malformed(Format, $"unexpected '{text[parser._pos]}' after the header dictionary", parser.Offset);
        }

        if (d is null || f is null || s is null)
        {
            DataFormatThrow.Malformed(Format, "the header dictionary must contain 'descr', 'fortran_order' and 'shape'", baseOffset);
        }

        descr = d;
        fortranOrder = f.Value;
        shape = s;
    }

    private readonly long Offset => _baseOffset + _pos;

    private void SkipSpace()
    {
        while (_pos < _text.Length && _text[_pos] is ' ' or '\t' or '\n' or '\r')
        {
            _pos++;
        }
    }

    private bool TryConsume(char c)
    {
        SkipSpace();
        if (_pos < _text.Length && _text[_pos] == c)
        {
            _pos++;
            return true;
        }

        return false;
    }

    private void Expect(char c)
    {
        if (!TryConsume(c))
        {
            Fail($"'{c}'");
        }
    }

    private readonly void Fail(string expected)
    {
        string found = _pos < _text.Length ? $"'{_text[_pos]}'" : "the end of the header";
        DataFormatThrow.Malformed(Format, $"malformed header dictionary: expected {expected}, found {found}", Offset);
    }

    private string ReadString()
    {
        SkipSpace();
        if (_pos >= _text.Length || _text[_pos] is not ('\'' or '"'))
        {
            Fail("a quoted string");
        }

        char quote = _text[_pos++];
        int start = _pos;
        while (_pos < _text.Length && _text[_pos] != quote)
        {
            if (_text[_pos] is '\\' or '\n')
            {
                Fail($"the closing {quote}");
            }

            _pos++;
        }

        if (_pos >= _text.Length)
        {
            Fail($"the closing {quote}");
        }

        string value = _text[start.._pos].ToString();
        _pos++;
        return value;
    }

    private bool ReadBool()
    {
        SkipSpace();
        ReadOnlySpan<char> rest = _text[_pos..];
        if (rest.StartsWith("True", StringComparison.Ordinal))
        {
            _pos += 4;
            return true;
        }

        if (rest.StartsWith("False", StringComparison.Ordinal))
        {
            _pos += 5;
            return false;
        }

        Fail("True or False");
        return false;
    }

    private long[] ReadTuple()
    {
        Expect('(');
        var values = new List<long>(2);
        while (!TryConsume(')'))
        {
            // A bound on the rank keeps a hostile header from growing this list without limit.
            if (values.Count == 32)
            {
                DataFormatThrow.Malformed(Format, "the shape has more than 32 dimensions", Offset);
            }

            values.Add(ReadInteger());
            if (!TryConsume(','))
            {
                Expect(')');
                break;
            }
        }

        return [.. values];
    }

    private long ReadInteger()
    {
        SkipSpace();
        int start = _pos;
        long value = 0;
        while (_pos < _text.Length && char.IsAsciiDigit(_text[_pos]))
        {
            if (value > (long.MaxValue - 9) / 10)
            {
                DataFormatThrow.Malformed(Format, "a shape entry is too large", _baseOffset + start);
            }

            value = (value * 10) + (_text[_pos] - '0');
            _pos++;
        }

        if (_pos == start)
        {
            Fail("a non-negative integer");
        }

        if (_pos < _text.Length && _text[_pos] == 'L')
        {
            _pos++; // long-integer suffix written by very old writers
        }

        return value;
    }
}

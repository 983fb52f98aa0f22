using System.Text;
using System.Text.RegularExpressions;

namespace VectorKit.Tests.Architecture;

/// <summary>
/// A C# file split for the namespace scan: its code with comments and the contents of string and character literals
/// blanked (same length and line breaks, so positions still map to lines), and the <c>cref</c> values of its XML docs.
/// </summary>
internal sealed partial class SourceFile
{
    private readonly string _text;

    private SourceFile(string name, string text, string code, List<(string Text, int Offset)> crefs, string ns)
    {
        Name = name;
        _text = text;
        Code = code;
        Crefs = crefs;
        Namespace = ns;
    }

    public string Name { get; }

    public string Code { get; }

    public IReadOnlyList<(string Text, int Offset)> Crefs { get; }

    public string Namespace { get; }

    public int LineOf(int position) => 1 + _text.AsSpan(0, position).Count('\n');

    public static SourceFile Parse(string name, string text)
    {
        var lexer = new Lexer(text);
        lexer.Code(untilCloseBrace: false);

        var crefs = new List<(string Text, int Offset)>();
        foreach ((int start, int end) in lexer.DocComments)
        {
            foreach (Match match in Cref().Matches(text, start).TakeWhile(m => m.Index < end))
            {
                Group value = match.Groups["value"];
                crefs.Add((value.Value, value.Index));
            }
        }

        string code = lexer.Output.ToString();
        Match declaration = NamespaceDeclaration().Match(code);
        if (!declaration.Success)
        {
            throw new InvalidDataException($"{name} declares no namespace.");
        }

        return new SourceFile(name, text, code, crefs, declaration.Groups[1].Value);
    }

    [GeneratedRegex(@"\bcref\s*=\s*(?:""(?<value>[^""]*)""|'(?<value>[^']*)')")]
    private static partial Regex Cref();

    [GeneratedRegex(@"^\s*namespace\s+([\w.]+)\s*[;{]", RegexOptions.Multiline)]
    private static partial Regex NamespaceDeclaration();

    // Copies code through and writes spaces over comments and literal contents (keeping line breaks). Interpolation
    // holes are code and are lexed as such, nested strings included.
    private sealed class Lexer(string text)
    {
        private int _position;

        public StringBuilder Output { get; } = new(text.Length);

        public List<(int Start, int End)> DocComments { get; } = [];

        public void Code(bool untilCloseBrace)
        {
            int depth = 0;
            while (_position < text.Length)
            {
                char c = text[_position];
                if (c == '/' && Peek(1) == '/')
                {
                    int end = text.IndexOf('\n', _position);
                    end = end < 0 ? text.Length : end;
                    if (Peek(2) == '/')
                    {
                        DocComments.Add((_position, end));
                    }

                    Blank(end);
                }
                else if (c == '/' && Peek(1) == '*')
                {
                    int end = text.IndexOf("*/", _position + 2, StringComparison.Ordinal);
                    Blank(end < 0 ? text.Length : end + 2);
                }
                else if (c == '\'')
                {
                    Character();
                }
                else if (c is '"' or '$' or '@' && StringStart() is { } start)
                {
                    String(start.Dollars, start.Verbatim, start.Quotes);
                }
                else
                {
                    if (untilCloseBrace)
                    {
                        if (c == '{')
                        {
                            depth++;
                        }
                        else if (c == '}' && depth-- == 0)
                        {
                            return;
                        }
                    }

                    Output.Append(c);
                    _position++;
                }
            }
        }

        private char Peek(int offset) => _position + offset < text.Length ? text[_position + offset] : '\0';

        private void Blank(int end)
        {
            for (; _position < end; _position++)
            {
                Output.Append(text[_position] == '\n' ? '\n' : ' ');
            }
        }

        private void Character()
        {
            int end = _position + 1;
            while (end < text.Length && text[end] != '\'' && text[end] != '\n')
            {
                end += text[end] == '\\' ? 2 : 1;
            }

            Blank(Math.Min(end + 1, text.Length));
        }

        // At a string literal's start ($ and @ prefixes, then one or three-or-more quotes): its shape, else null.
        private (int Dollars, bool Verbatim, int Quotes)? StringStart()
        {
            int i = _position;
            int dollars = 0;
            bool verbatim = false;
            while (i < text.Length && (text[i] == '$' || text[i] == '@'))
            {
                if (text[i] == '$')
                {
                    dollars++;
                }
                else
                {
                    verbatim = true;
                }

                i++;
            }

            if (i >= text.Length || text[i] != '"' || (i > _position && (char.IsLetterOrDigit(text[_position - 1]) || text[_position - 1] == '_')))
            {
                return null;
            }

            int quotes = 0;
            while (i + quotes < text.Length && text[i + quotes] == '"')
            {
                quotes++;
            }

            // Two quotes are an empty string, not a raw literal.
            return (dollars, verbatim, quotes >= 3 ? quotes : 1);
        }

        private void String(int dollars, bool verbatim, int quotes)
        {
            // Prefix and opening quotes.
            int open = _position;
            while (text[open] != '"')
            {
                open++;
            }

            Blank(open + quotes);
            int braces = Math.Max(dollars, 1);
            while (_position < text.Length)
            {
                char c = text[_position];
                if (quotes >= 3 && c == '"' && Run('"') >= quotes)
                {
                    Blank(_position + Run('"'));
                    return;
                }

                if (quotes == 1 && c == '"')
                {
                    if (verbatim && Peek(1) == '"')
                    {
                        Blank(_position + 2);
                        continue;
                    }

                    Blank(_position + 1);
                    return;
                }

                if (quotes == 1 && !verbatim && c == '\\')
                {
                    Blank(Math.Min(_position + 2, text.Length));
                    continue;
                }

                if (dollars > 0 && c == '{')
                {
                    int run = Run('{');
                    if (run >= braces && (quotes >= 3 || run == 1))
                    {
                        // A hole: its braces are syntax, its contents code.
                        Blank(_position + run);
                        Code(untilCloseBrace: true);
                        Blank(Math.Min(_position + braces, text.Length));
                        continue;
                    }

                    Blank(_position + run);
                    continue;
                }

                Blank(_position + 1);
            }
        }

        private int Run(char c)
        {
            int end = _position;
            while (end < text.Length && text[end] == c)
            {
                end++;
            }

            return end - _position;
        }
    }
}

using System.Text;

namespace VectorKit.TextEmbeddings;

/// <summary>One package's English description: its one-line summary and the summary followed by the long text.</summary>
internal sealed record PackageText(string Package, string Summary, string FullText);

/// <summary>Reads Debian's <c>Translation-en</c> index (package, <c>Description-en</c> in deb822 form).</summary>
internal static class DebianDescriptions
{
    /// <summary>
    /// Reads every package's description, whitespace-normalised, and keeps one package per distinct full text (the
    /// first in file order, which is by package name), since identical texts would make ties in the ground truth.
    /// </summary>
    public static (List<PackageText> Texts, int Records, int Duplicates) Read(string path)
    {
        var texts = new List<PackageText>();
        var seen = new HashSet<string>(StringComparer.Ordinal);
        int records = 0, duplicates = 0;
        string? package = null, summary = null;
        var body = new StringBuilder();
        bool inDescription = false;

        void Flush()
        {
            if (package is not null && summary is not null)
            {
                records++;
                string full = body.Length == 0 ? summary : summary + "\n" + body.ToString();
                if (seen.Add(full))
                {
                    texts.Add(new PackageText(package, summary, full));
                }
                else
                {
                    duplicates++;
                }
            }

            package = summary = null;
            body.Clear();
            inDescription = false;
        }

        foreach (string line in File.ReadLines(path, Encoding.UTF8))
        {
            if (line.Length == 0)
            {
                Flush();
            }
            else if (line[0] == ' ' || line[0] == '\t')
            {
                if (!inDescription)
                {
                    continue;
                }

                // deb822 long descriptions: " ." is a paragraph break; other lines are continued text.
                string content = line.Trim();
                if (content == ".")
                {
                    AppendBreak(body);
                }
                else
                {
                    if (body.Length > 0 && body[^1] != '\n')
                    {
                        body.Append(' ');
                    }

                    body.Append(Collapse(content));
                }
            }
            else
            {
                inDescription = false;
                int colon = line.IndexOf(':', StringComparison.Ordinal);
                if (colon <= 0)
                {
                    throw new InvalidDataException($"Not a deb822 field line in {path}: '{line}'.");
                }

                string field = line[..colon];
                string value = line[(colon + 1)..].Trim();
                if (field == "Package")
                {
                    package = value;
                }
                else if (field == "Description-en")
                {
                    summary = Collapse(value);
                    inDescription = true;
                }
            }
        }

        Flush();
        return (texts, records, duplicates);
    }

    private static void AppendBreak(StringBuilder body)
    {
        if (body.Length > 0 && body[^1] != '\n')
        {
            body.Append('\n');
        }
    }

    private static string Collapse(string s) => string.Join(' ', s.Split((char[]?)null, StringSplitOptions.RemoveEmptyEntries));
}

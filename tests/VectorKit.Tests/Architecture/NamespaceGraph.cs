using System.Text;
using System.Text.RegularExpressions;

namespace VectorKit.Tests.Architecture;

/// <summary>
/// The dependency graph between the library's namespaces, read from its source text (no compiler): an edge A → B
/// for every <c>using B;</c>, every fully qualified <c>VectorKit.B.Type</c>, every reference relative to an enclosing
/// namespace (<c>Exact.ExactIndex</c> inside <c>VectorKit.Indexes.InvertedFile</c>), in code and in XML-doc
/// <c>cref</c>s, and, for an enclosing namespace whose types a file can name without a <c>using</c>, every use of one
/// of those type names. Comments other than crefs and the contents of string literals are not references.
/// </summary>
internal sealed partial class NamespaceGraph
{
    private const string Root = "VectorKit";

    // From → (to → the first place seen, "file:line: reference").
    private readonly SortedDictionary<string, SortedDictionary<string, string>> _edges = new(StringComparer.Ordinal);

    private NamespaceGraph(IReadOnlyCollection<string> namespaces)
    {
        foreach (string ns in namespaces)
        {
            _edges[ns] = new SortedDictionary<string, string>(StringComparer.Ordinal);
        }
    }

    public IEnumerable<string> Namespaces => _edges.Keys;

    public int FileCount { get; private set; }

    public IReadOnlyDictionary<string, string> DependenciesOf(string ns) => _edges[ns];

    /// <summary>Reads every <c>.cs</c> file under <paramref name="sourceDirectory"/>, skipping <c>bin</c> and <c>obj</c>.</summary>
    public static NamespaceGraph FromDirectory(string sourceDirectory)
    {
        var files = Directory.EnumerateFiles(sourceDirectory, "*.cs", SearchOption.AllDirectories)
            .Where(path => !Path.GetRelativePath(sourceDirectory, path).Split(Path.DirectorySeparatorChar)
                .Any(part => part is "bin" or "obj"))
            .OrderBy(path => path, StringComparer.Ordinal)
            .Select(path => (Path.GetRelativePath(sourceDirectory, path).Replace('\\', '/'), File.ReadAllText(path)));
        return FromSources(files);
    }

    /// <summary>Builds the graph from (name, text) pairs; the names only label the evidence.</summary>
    public static NamespaceGraph FromSources(IEnumerable<(string Name, string Text)> sources)
    {
        var files = new List<SourceFile>();
        foreach ((string name, string text) in sources)
        {
            files.Add(SourceFile.Parse(name, text));
        }

        // Top-level and nested type names declared in each namespace.
        var types = new Dictionary<string, HashSet<string>>(StringComparer.Ordinal);
        foreach (SourceFile file in files)
        {
            if (!types.TryGetValue(file.Namespace, out HashSet<string>? declared))
            {
                declared = new HashSet<string>(StringComparer.Ordinal);
                types[file.Namespace] = declared;
            }

            foreach (Match match in TypeDeclaration().Matches(file.Code))
            {
                declared.Add(match.Groups["name"].Value);
            }
        }

        var graph = new NamespaceGraph(types.Keys) { FileCount = files.Count };
        foreach (SourceFile file in files)
        {
            graph.AddReferences(file, types);
        }

        return graph;
    }

    /// <summary>Every strongly connected group of two or more namespaces, each listed in order.</summary>
    public IReadOnlyList<IReadOnlyList<string>> FindCycles()
    {
        // Tarjan's algorithm; the graph has a dozen nodes, so recursion depth is no concern.
        var index = new Dictionary<string, int>(StringComparer.Ordinal);
        var lowLink = new Dictionary<string, int>(StringComparer.Ordinal);
        var stack = new Stack<string>();
        var onStack = new HashSet<string>(StringComparer.Ordinal);
        var cycles = new List<IReadOnlyList<string>>();

        void Visit(string node)
        {
            index[node] = lowLink[node] = index.Count;
            stack.Push(node);
            onStack.Add(node);
            foreach (string next in _edges[node].Keys)
            {
                if (!index.ContainsKey(next))
                {
                    Visit(next);
                    lowLink[node] = Math.Min(lowLink[node], lowLink[next]);
                }
                else if (onStack.Contains(next))
                {
                    lowLink[node] = Math.Min(lowLink[node], index[next]);
                }
            }

            if (lowLink[node] == index[node])
            {
                var component = new List<string>();
                string member;
                do
                {
                    member = stack.Pop();
                    onStack.Remove(member);
                    component.Add(member);
                }
                while (member != node);

                if (component.Count > 1)
                {
                    component.Sort(StringComparer.Ordinal);
                    cycles.Add(component);
                }
            }
        }

        foreach (string node in _edges.Keys)
        {
            if (!index.ContainsKey(node))
            {
                Visit(node);
            }
        }

        return cycles;
    }

    /// <summary>The whole graph, one namespace per block, each dependency with the first reference that made it.</summary>
    public string Describe()
    {
        var text = new StringBuilder();
        foreach ((string from, SortedDictionary<string, string> targets) in _edges)
        {
            text.Append(from).Append('\n');
            foreach ((string to, string evidence) in targets)
            {
                text.Append("  -> ").Append(to).Append("   (").Append(evidence).Append(")\n");
            }
        }

        return text.ToString();
    }

    private void AddReferences(SourceFile file, Dictionary<string, HashSet<string>> types)
    {
        string from = file.Namespace;
        var known = types.Keys.ToHashSet(StringComparer.Ordinal);

        // Where a reference is searched: the code, and each cref on its own (at its position in the file).
        var texts = new List<(string Text, int Offset)> { (file.Code, 0) };
        texts.AddRange(file.Crefs);

        foreach ((string text, int offset) in texts)
        {
            // Fully qualified: VectorKit.X.Y... (using directives included).
            foreach (Match match in QualifiedName().Matches(text))
            {
                string? target = DeepestNamespace(match.Value, known);
                if (target is not null)
                {
                    Add(from, target, file, offset + match.Index, match.Value);
                }
            }

            // Relative to an enclosing namespace: C# looks in the innermost enclosing namespace first and stops at the
            // first one holding a namespace of that name; the next name must be a type there (otherwise the chain is
            // member access, e.g. on a property named Distance).
            foreach (Match match in DottedName().Matches(text))
            {
                string[] parts = match.Value.Split('.');
                for (string? scope = from; scope is not null; scope = Parent(scope))
                {
                    string candidate = scope + "." + parts[0];
                    if (!known.Contains(candidate))
                    {
                        continue;
                    }

                    int next = 1;
                    while (next < parts.Length && known.Contains(candidate + "." + parts[next]))
                    {
                        candidate += "." + parts[next++];
                    }

                    if (next == parts.Length || types[candidate].Contains(parts[next]))
                    {
                        Add(from, candidate, file, offset + match.Index, match.Value);
                    }

                    break;
                }
            }

            // Enclosing namespaces' types named without a using.
            for (string? scope = Parent(from); scope is not null; scope = Parent(scope))
            {
                if (!types.TryGetValue(scope, out HashSet<string>? declared))
                {
                    continue;
                }

                foreach (Match match in SimpleName().Matches(text))
                {
                    if (declared.Contains(match.Value))
                    {
                        Add(from, scope, file, offset + match.Index, match.Value);
                        break;
                    }
                }
            }
        }
    }

    private void Add(string from, string to, SourceFile file, int position, string reference)
    {
        if (to != from && !_edges[from].ContainsKey(to))
        {
            _edges[from][to] = $"{file.Name}:{file.LineOf(position)}: {reference}";
        }
    }

    private static string? DeepestNamespace(string qualifiedName, HashSet<string> known)
    {
        string name = qualifiedName.StartsWith("global::", StringComparison.Ordinal) ? qualifiedName["global::".Length..] : qualifiedName;
        for (string? candidate = name; candidate is not null; candidate = Parent(candidate))
        {
            if (known.Contains(candidate))
            {
                return candidate;
            }
        }

        return null;
    }

    private static string? Parent(string ns)
    {
        int dot = ns.LastIndexOf('.');
        return dot < 0 ? null : ns[..dot];
    }

    [GeneratedRegex(@"\b(?:class|struct|interface|enum|record)\s+(?<name>[A-Z]\w*)|\bdelegate\s+[^;(]*?\b(?<name>[A-Z]\w*)\s*[<(]")]
    private static partial Regex TypeDeclaration();

    [GeneratedRegex(@"(?<![\w.])(?:global::)?" + Root + @"(?:\.[A-Za-z_]\w*)+")]
    private static partial Regex QualifiedName();

    [GeneratedRegex(@"(?<![\w.:])[A-Z]\w*(?:\.[A-Z]\w*)+")]
    private static partial Regex DottedName();

    [GeneratedRegex(@"(?<![\w.])[A-Z]\w*\b")]
    private static partial Regex SimpleName();
}

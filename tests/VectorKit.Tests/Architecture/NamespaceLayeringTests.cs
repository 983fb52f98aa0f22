using System.Runtime.CompilerServices;

namespace VectorKit.Tests.Architecture;

/// <summary>
/// The library's namespaces form layers: each depends only on layers to its left, so none has a cycle and the low
/// layers (kernels, quantizers) never learn about indexes, files or re-ranking. The graph is read from the source
/// (<see cref="NamespaceGraph"/>); a failure prints it with the reference behind every edge.
/// </summary>
public class NamespaceLayeringTests
{
    // Left to right. A namespace may depend on any namespace of an earlier layer; within a layer only the pairs in
    // SameLayer are allowed. A sub-namespace may name its parents' types without a using (the scan counts those uses
    // as edges), which the order permits, as the parents sit to the left.
    private static readonly string[][] Layers =
    [
        ["VectorKit"],
        ["VectorKit.Distance", "VectorKit.Distance.Kernels"],
        ["VectorKit.Internal"],
        ["VectorKit.Clustering"],
        ["VectorKit.Quantization"],
        ["VectorKit.Indexes"],
        ["VectorKit.Indexes.Exact", "VectorKit.Indexes.Graph", "VectorKit.Indexes.InvertedFile"],
        ["VectorKit.Evaluation"],
        ["VectorKit.IO", "VectorKit.Persistence", "VectorKit.Tuning"],
        ["VectorKit.Reranking"],
    ];

    private static readonly (string From, string To)[] SameLayer =
    [
        // The public kernels (VectorDistance) are a front for the internal SIMD ones; the SIMD ones know no metric enum.
        ("VectorKit.Distance", "VectorKit.Distance.Kernels"),
        // The inverted file's docs point at the exact index whose distances its float32 lists reproduce.
        ("VectorKit.Indexes.InvertedFile", "VectorKit.Indexes.Exact"),
    ];

    [Fact]
    public void ScanSeesTheWholeLibrary()
    {
        NamespaceGraph graph = LibraryGraph();

        Assert.True(graph.FileCount > 100, $"Only {graph.FileCount} source files found.\n{graph.Describe()}");
        Assert.Equal(Layers.SelectMany(layer => layer).Order(StringComparer.Ordinal), graph.Namespaces);
        Assert.Contains("VectorKit.Indexes.Graph", graph.DependenciesOf("VectorKit.Persistence").Keys);
        Assert.Contains("VectorKit", graph.DependenciesOf("VectorKit.Indexes").Keys);
    }

    [Fact]
    public void NamespacesHaveNoCycle()
    {
        NamespaceGraph graph = LibraryGraph();

        IReadOnlyList<IReadOnlyList<string>> cycles = graph.FindCycles();

        Assert.True(cycles.Count == 0, $"Namespaces that depend on each other: {string.Join("; ", cycles.Select(c => string.Join(", ", c)))}\n\n{graph.Describe()}");
    }

    [Fact]
    public void NamespacesDependOnlyOnEarlierLayers()
    {
        NamespaceGraph graph = LibraryGraph();

        List<string> violations = LayeringViolations(graph);

        Assert.True(violations.Count == 0, $"Against the layering:\n{string.Join("\n", violations)}\n\n{graph.Describe()}");
    }

    [Fact]
    public void ScanFindsBackReferencesInEveryForm()
    {
        // One file per form of reference that goes against the order; each must show as a violation.
        (string Name, string Text)[] library =
        [
            ("Indexes/IVectorIndex.cs", "namespace VectorKit.Indexes;\npublic interface IVectorIndex { }\n"),
            ("Distance/DistanceMetric.cs", "namespace VectorKit.Distance;\npublic enum DistanceMetric { Cosine }\n"),
            ("Distance/VectorDistance.cs", "using VectorKit.Distance.Kernels;\nnamespace VectorKit.Distance;\npublic static class VectorDistance { }\n"),
            ("IO/VectorReader.cs", "namespace VectorKit.IO;\npublic static class VectorReader { }\n"),
            ("Persistence/IndexFile.cs", "namespace VectorKit.Persistence;\npublic static class IndexFile { }\n"),
            ("Reranking/RerankingOptions.cs", "namespace VectorKit.Reranking;\npublic sealed class RerankingOptions { }\n"),
            ("Evaluation/Recall.cs", "namespace VectorKit.Evaluation;\npublic static class Recall { }\n"),
            ("Quantization/ScalarQuantizer.cs", "namespace VectorKit.Quantization;\npublic sealed class ScalarQuantizer { }\n"),
            ("Indexes/Graph/GraphIndex.cs", "namespace VectorKit.Indexes.Graph;\npublic sealed class GraphIndex { }\n"),
            ("Distance/Kernels/PairKernel.cs", "namespace VectorKit.Distance.Kernels;\ninternal static class PairKernel { }\n"),
            ("Indexes/A.cs", "/// <summary>See <see cref=\"IO.VectorReader\"/>.</summary>\nnamespace VectorKit.Indexes;\n"),
            ("Quantization/B.cs", "using VectorKit.Indexes;\nnamespace VectorKit.Quantization;\n"),
            ("Indexes/Graph/C.cs", "namespace VectorKit.Indexes.Graph;\nclass C { object F() => Persistence.IndexFile.X; }\n"),
            ("Indexes/D.cs", "namespace VectorKit.Indexes;\nclass D { string S => $\"{global::VectorKit.Reranking.RerankingOptions.X}\"; }\n"),
            ("Evaluation/E.cs", "namespace VectorKit.Evaluation;\n/// <exception cref=\"T:VectorKit.Reranking.RerankingOptions\"/>\nclass E { }\n"),
            ("Distance/Kernels/F.cs", "namespace VectorKit.Distance.Kernels;\nclass F { DistanceMetric M; }\n"),
        ];

        NamespaceGraph graph = NamespaceGraph.FromSources(library);
        List<string> violations = LayeringViolations(graph);

        string[] expected =
        [
            "VectorKit.Indexes -> VectorKit.IO",
            "VectorKit.Quantization -> VectorKit.Indexes",
            "VectorKit.Indexes.Graph -> VectorKit.Persistence",
            "VectorKit.Indexes -> VectorKit.Reranking",
            "VectorKit.Evaluation -> VectorKit.Reranking",
            "VectorKit.Distance.Kernels -> VectorKit.Distance",
        ];
        Assert.All(expected, edge => Assert.Contains(violations, v => v.StartsWith(edge + " ", StringComparison.Ordinal)));
        Assert.Equal(expected.Length, violations.Count);
        Assert.Contains(graph.FindCycles(), cycle => cycle.SequenceEqual(["VectorKit.Distance", "VectorKit.Distance.Kernels"]));
    }

    [Fact]
    public void ScanIgnoresProseStringsAndMemberAccess()
    {
        (string Name, string Text)[] library =
        [
            ("IO/VectorReader.cs", "namespace VectorKit.IO;\npublic static class VectorReader { }\n"),
            ("Distance/DistanceMetric.cs", "namespace VectorKit.Distance;\npublic enum DistanceMetric { Cosine }\n"),
            ("Indexes/A.cs",
                "namespace VectorKit.Indexes;\n" +
                "/// <summary>Like <c>VectorKit.IO.VectorReader</c>; see IO.VectorReader.</summary>\n" +
                "class A\n{\n" +
                "    // VectorKit.IO.VectorReader\n" +
                "    /* IO.VectorReader */\n" +
                "    string S => \"VectorKit.IO.VectorReader\" + @\"IO.VectorReader\" + $\"{1} IO.VectorReader\" + \"\"\"\n        IO.VectorReader \"\" \n        \"\"\";\n" +
                "    char Q => '\"';\n" +
                "    float Distance => 0;\n" +
                "    string T => Distance.ToString();\n" +
                "}\n"),
        ];

        NamespaceGraph graph = NamespaceGraph.FromSources(library);

        Assert.True(graph.DependenciesOf("VectorKit.Indexes").Count == 0, graph.Describe());
    }

    private static List<string> LayeringViolations(NamespaceGraph graph)
    {
        var layerOf = new Dictionary<string, int>(StringComparer.Ordinal);
        for (int i = 0; i < Layers.Length; i++)
        {
            foreach (string ns in Layers[i])
            {
                layerOf[ns] = i;
            }
        }

        var violations = new List<string>();
        foreach (string from in graph.Namespaces)
        {
            if (!layerOf.TryGetValue(from, out int fromLayer))
            {
                violations.Add($"{from} is in no layer: add it to {nameof(NamespaceLayeringTests)}.{nameof(Layers)} and DEVELOPERS.md");
                continue;
            }

            foreach ((string to, string evidence) in graph.DependenciesOf(from))
            {
                int toLayer = layerOf.GetValueOrDefault(to, int.MaxValue);
                bool allowed = toLayer < fromLayer || (toLayer == fromLayer && SameLayer.Contains((from, to)));
                if (!allowed)
                {
                    violations.Add($"{from} -> {to} ({evidence})");
                }
            }
        }

        return violations;
    }

    private static NamespaceGraph LibraryGraph() => NamespaceGraph.FromDirectory(LibrarySourceDirectory());

    // src/VectorKit, found from this file's path (a clean clone needs nothing else); when the compiler mapped source
    // paths away, from the solution directory above the test's output directory.
    private static string LibrarySourceDirectory([CallerFilePath] string sourceFile = "")
    {
        string candidate = Path.GetFullPath(Path.Combine(Path.GetDirectoryName(sourceFile) ?? ".", "..", "..", "..", "src", "VectorKit"));
        if (File.Exists(Path.Combine(candidate, "VectorKit.csproj")))
        {
            return candidate;
        }

        for (var dir = new DirectoryInfo(AppContext.BaseDirectory); dir is not null; dir = dir.Parent)
        {
            candidate = Path.Combine(dir.FullName, "src", "VectorKit");
            if (File.Exists(Path.Combine(candidate, "VectorKit.csproj")))
            {
                return candidate;
            }
        }

        throw new InvalidOperationException($"src/VectorKit was not found from {sourceFile} or {AppContext.BaseDirectory}.");
    }
}

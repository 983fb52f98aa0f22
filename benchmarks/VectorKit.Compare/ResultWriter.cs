using System.Globalization;

namespace VectorKit.Compare;

/// <summary>
/// Prints one tab-separated line per figure to standard output: version, round, kind, measure, value. Recall
/// measures carry k in their name (<c>batch_recall@10</c>).
/// </summary>
internal sealed class ResultWriter(string label, int round, int k)
{
    public void Write(string kind, string measure, double value)
    {
        string name = measure.EndsWith("_recall", StringComparison.Ordinal) ? $"{measure}@{k}" : measure;
        Console.Out.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{label}\t{round}\t{kind}\t{name}\t{value:G10}"));
        Console.Out.Flush();
    }
}

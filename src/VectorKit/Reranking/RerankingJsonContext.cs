using System.Text.Json.Serialization;

namespace VectorKit.Reranking;

/// <summary>Compile-time JSON metadata for the serialisable re-ranking types (no reflection at run time).</summary>
[JsonSourceGenerationOptions(WriteIndented = true, DefaultIgnoreCondition = JsonIgnoreCondition.WhenWritingNull)]
[JsonSerializable(typeof(RerankingOptionsDocument))]
[JsonSerializable(typeof(RerankingOptions))]
[JsonSerializable(typeof(CalibrationReport))]
internal sealed partial class RerankingJsonContext : JsonSerializerContext
{
}

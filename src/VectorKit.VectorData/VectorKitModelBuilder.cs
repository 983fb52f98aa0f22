using Microsoft.Extensions.AI;
using Microsoft.Extensions.VectorData.ProviderServices;

namespace VectorKit.VectorData;

/// <summary>Builds the abstraction's collection model with the property types this connector stores.</summary>
internal sealed class VectorKitModelBuilder : CollectionModelBuilder
{
    internal const string SupportedDataTypes =
        "string, bool, int, long, float, double, decimal, DateTime, DateTimeOffset, Guid (each also nullable), "
        + "and arrays or List<T> of string, int, long, float, double, bool, Guid";

    internal const string SupportedVectorTypes = "ReadOnlyMemory<float>, ReadOnlyMemory<float>?, float[], Embedding<float>";

    private static readonly CollectionModelBuildingOptions BuildingOptions = new()
    {
        SupportsMultipleVectors = true,
        RequiresAtLeastOneVector = false,
    };

    public VectorKitModelBuilder()
        : base(BuildingOptions)
    {
    }

    protected override bool IsDataPropertyTypeValid(Type type, [System.Diagnostics.CodeAnalysis.NotNullWhen(false)] out string? supportedTypes)
    {
        supportedTypes = SupportedDataTypes;
        return ValueCodec.IsSupportedDataType(type);
    }

    protected override bool IsVectorPropertyTypeValid(Type type, [System.Diagnostics.CodeAnalysis.NotNullWhen(false)] out string? supportedTypes)
    {
        supportedTypes = SupportedVectorTypes;
        return IsNativeVectorType(type);
    }

    /// <summary>Whether a vector property of this type holds the embedding itself (no generation needed).</summary>
    internal static bool IsNativeVectorType(Type type) =>
        type == typeof(ReadOnlyMemory<float>) || type == typeof(ReadOnlyMemory<float>?) || type == typeof(float[])
        || type == typeof(Embedding<float>);
}

using Microsoft.Extensions.VectorData;

namespace VectorKit.VectorData;

/// <summary>
/// Options for one <see cref="VectorKitCollection{TKey, TRecord}"/>: the record definition and embedding generator the
/// abstraction defines (<see cref="VectorStoreCollectionOptions"/>); nothing of its own yet.
/// </summary>
public sealed class VectorKitCollectionOptions : VectorStoreCollectionOptions
{
    /// <summary>Options with no definition (the record type's attributes apply) and no generator of the collection's own.</summary>
    public VectorKitCollectionOptions()
    {
    }
}

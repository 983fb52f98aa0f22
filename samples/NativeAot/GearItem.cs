namespace NativeAotSample;

/// <summary>One rentable item of the sample's invented catalogue.</summary>
/// <param name="Id">The id the item is stored under in every index.</param>
/// <param name="Name">A generated display name.</param>
/// <param name="Category">The catalogue section, e.g. "Water".</param>
/// <param name="InStock">Whether a unit is on the shelf for the coming weekend.</param>
internal sealed record GearItem(long Id, string Name, string Category, bool InStock);

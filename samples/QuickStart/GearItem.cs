namespace QuickStart;

/// <summary>One rentable item of the demo catalogue.</summary>
/// <param name="Id">The id the item is stored under in the index.</param>
/// <param name="Name">A generated display name, e.g. "Tarn Dome 2P tent".</param>
/// <param name="Category">The catalogue section, e.g. "Water".</param>
/// <param name="Kind">The kind of gear, e.g. "touring kayak".</param>
/// <param name="Season">"summer", "3-season" or "winter".</param>
/// <param name="Build">"ultralight", "standard" or "expedition".</param>
/// <param name="InStock">Whether a unit is on the shelf for the coming weekend.</param>
internal sealed record GearItem(long Id, string Name, string Category, string Kind, string Season, string Build, bool InStock);

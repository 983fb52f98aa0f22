namespace VectorKit.Indexes;

/// <summary>
/// The search settings an index kind can trade recall for speed with, as the shared tuning sees them.
/// </summary>
/// <param name="MaxWidth">The largest useful <see cref="SearchOptions.SearchWidth"/>; 0 when the kind has no width (the exact index).</param>
/// <param name="DefaultWidth">The width of the index options (0 when there is no width).</param>
/// <param name="WidthCoversDepth">Whether a width below the re-scoring depth acts as the depth (the graph keeps at least that many candidates).</param>
/// <param name="Rescores">Whether the index keeps full vectors, so <see cref="SearchOptions.RescoreDepth"/> applies.</param>
/// <param name="DefaultDepth">The re-scoring depth of the index options.</param>
internal readonly record struct SearchKnobs(int MaxWidth, int DefaultWidth, bool WidthCoversDepth, bool Rescores, int DefaultDepth);

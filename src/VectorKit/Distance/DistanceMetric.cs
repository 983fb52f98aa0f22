namespace VectorKit.Distance;

/// <summary>
/// How two vectors are compared. Every metric is reported as a <em>distance</em>: smaller is better,
/// and results are always ordered by ascending distance, ties broken by ascending id.
/// </summary>
/// <remarks>
/// The distance reported for each metric, for a query <c>q</c> and a stored vector <c>x</c>:
/// <list type="table">
/// <item><term><see cref="SquaredEuclidean"/></term><description><c>Σ (q[i] − x[i])²</c>; in [0, +∞).</description></item>
/// <item><term><see cref="InnerProduct"/></term><description><c>−Σ q[i]·x[i]</c>; the negated dot product, so the largest dot product ranks first.</description></item>
/// <item><term><see cref="Cosine"/></term><description><c>1 − cos(q, x)</c>; in [0, 2]. Indexes normalise stored vectors to unit
/// length once, at insert, and the query once per search, so the stored vector is the unit vector.</description></item>
/// </list>
/// </remarks>
public enum DistanceMetric
{
    /// <summary>Squared Euclidean (L2) distance, <c>Σ (q[i] − x[i])²</c>.</summary>
    SquaredEuclidean = 0,

    /// <summary>Negated inner (dot) product, <c>−Σ q[i]·x[i]</c>: the best match has the largest dot product.</summary>
    InnerProduct = 1,

    /// <summary>Cosine distance, <c>1 − q·x / (‖q‖ ‖x‖)</c>. Zero vectors are rejected.</summary>
    Cosine = 2,
}

namespace NativeAotSample;

/// <summary>A member's request at the rental desk: what they describe, and whether only items on the shelf count.</summary>
/// <param name="Vector">The request's vector, in the catalogue's space.</param>
/// <param name="OnShelfOnly">Whether booked items are of no use to this member.</param>
/// <remarks>A value type on purpose: the pipeline is then instantiated over a struct, which native AOT compiles ahead of time.</remarks>
internal readonly record struct GearRequest(float[] Vector, bool OnShelfOnly);

namespace NativeAotSample;

/// <summary>64-bit FNV-1a over ids and distance bits: one number that changes when any result changes.</summary>
internal static class Fnv
{
    public const ulong Start = 14695981039346656037UL;

    public static ulong Add(ulong hash, long value)
    {
        for (int i = 0; i < 8; i++)
        {
            hash = (hash ^ (byte)(value >> (8 * i))) * 1099511628211UL;
        }

        return hash;
    }
}

using System.Runtime.CompilerServices;

namespace VectorKit.Indexes.Graph;

/// <summary>
/// A binary min-heap of (key, node slot) pairs in two flat arrays. The beam search uses one with distances as keys
/// (the candidates, nearest first) and one with negated distances (the results, farthest first).
/// </summary>
internal sealed class NodeHeap
{
    private float[] _keys = new float[64];
    private int[] _slots = new int[64];

    public int Count { get; private set; }

    public float TopKey
    {
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        get => _keys[0];
    }

    public int TopSlot
    {
        [MethodImpl(MethodImplOptions.AggressiveInlining)]
        get => _slots[0];
    }

    public void Clear() => Count = 0;

    // Push and Pop inline into the walk (its own method, so the kernel keeps its inlining budget); growth stays out of line.
    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public void Push(float key, int slot)
    {
        if (Count == _keys.Length)
        {
            Grow();
        }

        float[] keys = _keys;
        int[] slots = _slots;
        int i = Count++;
        while (i > 0)
        {
            int parent = (i - 1) >> 1;
            if (keys[parent] <= key)
            {
                break;
            }

            keys[i] = keys[parent];
            slots[i] = slots[parent];
            i = parent;
        }

        keys[i] = key;
        slots[i] = slot;
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    public void Pop()
    {
        int count = --Count;
        if (count == 0)
        {
            return;
        }

        float[] keys = _keys;
        int[] slots = _slots;
        float key = keys[count];
        int slot = slots[count];
        int i = 0;
        while (true)
        {
            int child = (2 * i) + 1;
            if (child >= count)
            {
                break;
            }

            if (child + 1 < count && keys[child + 1] < keys[child])
            {
                child++;
            }

            if (keys[child] >= key)
            {
                break;
            }

            keys[i] = keys[child];
            slots[i] = slots[child];
            i = child;
        }

        keys[i] = key;
        slots[i] = slot;
    }

    [MethodImpl(MethodImplOptions.NoInlining)]
    private void Grow()
    {
        Array.Resize(ref _keys, _keys.Length * 2);
        Array.Resize(ref _slots, _slots.Length * 2);
    }
}

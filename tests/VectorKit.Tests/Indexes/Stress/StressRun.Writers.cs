using VectorKit.Tests.Indexes.Contract;

namespace VectorKit.Tests.Indexes.Stress;

/// <summary>The writers: each changes only its own ids, so it knows their state and every write it makes is valid.</summary>
internal sealed partial class StressRun
{
    private const int MaxBatch = 6;

    private void WriterLoop(int writer, int phase, int operations)
    {
        Random random = RandomFor(writer, phase);
        for (int op = 0; op < operations && !_stop; op++)
        {
            Guard($"phase {phase}, writer {writer}, write {op}", () => WriteOnce(writer, random));
            Interlocked.Increment(ref _writesThisPhase);
        }
    }

    private void WriteOnce(int writer, Random random)
    {
        bool[] present = _present[writer];
        int live = present.Count(p => p);
        double fill = (double)live / present.Length;
        int choice = random.Next(100);
        if (writer == 0 && choice < 2)
        {
            // Beside readers, saves and the other writer's writes.
            _index.Compact();
            Interlocked.Increment(ref Counters.Compacts);
            return;
        }

        WriteItems(writer, random, present, fill);
    }

    private void WriteItems(int writer, Random random, bool[] present, double fill)
    {
        // Six kinds of write; adds give way to removals when the writer's ids are mostly present, and the reverse.
        int kind = random.Next(6);
        if (kind <= 1 && fill > 0.75)
        {
            kind += 4;
        }
        else if (kind >= 4 && fill < 0.25)
        {
            kind -= 4;
        }

        switch (kind)
        {
            case 0:
            {
                int[] slots = Pick(writer, random, 1, wantPresent: false);
                float[] rows = Rows(random, slots.Length);
                Write(writer, slots, rows, () => { _index.Add(_ids[writer][slots[0]], rows); return 0; }, _ => { });
                break;
            }

            case 1:
            {
                int[] slots = Pick(writer, random, 1 + random.Next(MaxBatch), wantPresent: false);
                float[] rows = Rows(random, slots.Length);
                long[] ids = IdsOf(writer, slots);
                Write(writer, slots, rows, () => { _index.AddRange(ids, rows); return 0; }, _ => { });
                break;
            }

            case 2:
            {
                int[] slots = [random.Next(present.Length)];
                bool expected = present[slots[0]];
                float[] rows = Rows(random, 1);
                Write(writer, slots, rows, () => _index.AddOrReplace(_ids[writer][slots[0]], rows) ? 1 : 0, replaced => Expect(replaced == (expected ? 1 : 0), $"AddOrReplace returned {replaced == 1}, the id was {(expected ? "present" : "absent")}"));
                break;
            }

            case 3:
            {
                int[] slots = Distinct(random, 1 + random.Next(MaxBatch), present.Length);
                int expected = slots.Count(s => present[s]);
                float[] rows = Rows(random, slots.Length);
                long[] ids = IdsOf(writer, slots);
                Write(writer, slots, rows, () => _index.AddOrReplaceRange(ids, rows), replaced => Expect(replaced == expected, $"AddOrReplaceRange replaced {replaced}, {expected} of its ids were present"));
                break;
            }

            case 4:
            {
                int[] slots = Pick(writer, random, 1, wantPresent: true);
                Write(writer, slots, null, () => { _index.Remove(_ids[writer][slots[0]]); return 0; }, _ => { });
                break;
            }

            default:
            {
                int[] slots = Pick(writer, random, 1 + random.Next(MaxBatch), wantPresent: true);
                long[] ids = IdsOf(writer, slots);
                Write(writer, slots, null, () => { _index.RemoveRange(ids); return 0; }, _ => { });
                break;
            }
        }
    }

    /// <summary>
    /// One write: recorded as called in the model, made, checked (its result, then the index read back for each of its
    /// ids: nobody else writes them), and recorded as returned with what the index now stores.
    /// </summary>
    private void Write(int writer, int[] slots, float[]? rows, Func<int> call, Action<int> checkResult)
    {
        if (slots.Length == 0)
        {
            return;
        }

        long[] ids = IdsOf(writer, slots);
        float[]?[] vectors = slots.Select((_, i) => rows?.AsSpan(i * Dim, Dim).ToArray()).ToArray();
        _model.Begin(ids, vectors);
        int result = call();
        Interlocked.Increment(ref Counters.Writes);
        checkResult(result);
        var stored = new float[]?[ids.Length];
        for (int i = 0; i < ids.Length; i++)
        {
            if (vectors[i] is null)
            {
                Expect(!_index.Contains(ids[i]), $"id {ids[i]} is still present after its removal returned");
                Expect(!_index.TryGetVector(ids[i], new float[Dim]), $"id {ids[i]} still has a vector after its removal returned");
            }
            else
            {
                var back = new float[Dim];
                Expect(_index.TryGetVector(ids[i], back), $"id {ids[i]} has no vector after its write returned");
                _variant.AssertStored(_index, vectors[i]!, back);
                stored[i] = back;
            }

            Interlocked.Increment(ref Counters.ItemsChecked);
            _present[writer][slots[i]] = vectors[i] is not null;
        }

        _model.End(ids, stored);
    }

    private static void Expect(bool condition, string message)
    {
        if (!condition)
        {
            throw new StressFailure(message);
        }
    }

    private long[] IdsOf(int writer, int[] slots) => slots.Select(s => _ids[writer][s]).ToArray();

    private static float[] Rows(Random random, int count) => ContractData.Rows(count, Dim, random.Next());

    /// <summary>Up to <paramref name="count"/> distinct slots of the writer that are (or are not) present.</summary>
    private int[] Pick(int writer, Random random, int count, bool wantPresent)
    {
        bool[] present = _present[writer];
        var slots = new List<int>(count);
        for (int attempt = 0; attempt < count * 8 && slots.Count < count; attempt++)
        {
            int s = random.Next(present.Length);
            if (present[s] == wantPresent && !slots.Contains(s))
            {
                slots.Add(s);
            }
        }

        return [.. slots];
    }

    private static int[] Distinct(Random random, int count, int range)
    {
        var slots = new List<int>(count);
        while (slots.Count < count)
        {
            int s = random.Next(range);
            if (!slots.Contains(s))
            {
                slots.Add(s);
            }
        }

        return [.. slots];
    }
}

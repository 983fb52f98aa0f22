using VectorKit.Indexes.Exact;
using VectorKit.Persistence;
using VectorKit.SaveChild;

// Builds CrashSample's index, says "ready", then saves it over <target>:
//   save <target> <count> <dimension> <seed>            the public IndexFile.Save(index, path), then says "saved"
//   pause <target> <count> <dimension> <seed> <byte>    the same atomic save, stopped for good once <byte> bytes
//                                                       are in the temporary file (-1: all bytes written, before the
//                                                       flush to disk and the rename); says "paused" and waits
// The parent test kills this process with SIGKILL at the point it wants.
if (args.Length < 5)
{
    Console.Error.WriteLine("usage: save|pause <target> <count> <dimension> <seed> [byte]");
    return 2;
}

string target = args[1];
using ExactIndex index = CrashSample.Build(int.Parse(args[2]), int.Parse(args[3]), ulong.Parse(args[4]));
Console.Out.WriteLine("ready");
Console.Out.Flush();
if (args[0] == "save")
{
    IndexFile.Save(index, target);
    Console.Out.WriteLine("saved");
    return 0;
}

long pauseAt = long.Parse(args[5]);
IndexFile.SaveAtomically(index, target, stream => new PausingStream(stream, pauseAt), default);
Console.Error.WriteLine("the save was expected to pause");
return 1;

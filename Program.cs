using VectorKit.Distance;""")
s=s.replace("""ReadmeExample.Run();
Console.WriteLine($"package ok: {results} results, graph recall@{K} {recall:0.000}, save and load round trip equal");""","""ReadmeExample.Run();
string connector = StoreCheck.RunAsync(Path.Combine(directory, "store")).GetAwaiter().GetResult();
Console.WriteLine($"package ok: {results} results, graph recall@{K} {recall:0.000}, save and load round trip equal; connector: {connector}");""")
open(p,'w').write(s)

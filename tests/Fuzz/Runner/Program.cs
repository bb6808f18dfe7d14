using SharpFuzz;
using Strayspot.Fuzz;

// strayspot-fuzz TARGET: one target under afl++ (inputs on standard input, one per run, forked by afl-fuzz).
// strayspot-fuzz TARGET FILE...: replays files (a crash afl++ found) and prints what each did.
if (args.Length == 0 || !FuzzTargets.All.ContainsKey(args[0]))
{
    Console.Error.WriteLine($"usage: strayspot-fuzz TARGET [FILE...]; targets: {string.Join(", ", FuzzTargets.All.Keys)}");
    return 2;
}
string target = args[0];
if (args.Length > 1)
{
    foreach (string file in args.Skip(1))
    {
        try { FuzzTargets.Run(target, File.ReadAllBytes(file)); Console.WriteLine($"{file}: ok"); }
        catch (Exception e) { Console.WriteLine($"{file}: CRASH {e}"); }
    }
    return 0;
}
Fuzzer.OutOfProcess.Run(stream =>
{
    using var buffer = new MemoryStream();
    stream.CopyTo(buffer);
    FuzzTargets.Run(target, buffer.ToArray());
});
return 0;

using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Fuzz.Tests.Engine;

/// <summary>
/// One thing to fuzz: how to make input number i from its own seeded random stream, and the property every input
/// must satisfy. <see cref="Check"/> returns a short outcome label (counted in the report, e.g. "valid" or
/// "invalid: equation"); any exception it lets escape is a finding.
/// </summary>
/// <param name="Name">Names the target in reports and in the saved files; also keys the input streams.</param>
/// <param name="Generate">Builds an input from a random stream derived from (seed, name, index).</param>
/// <param name="Check">Runs the code under test on the input and checks the outcome.</param>
/// <param name="FileExtension">Extension of saved inputs, e.g. ".family.json" (so they can be moved into a corpus as they are).</param>
internal sealed record FuzzTarget(string Name, Func<SeededRandom, byte[]> Generate, Func<byte[], string> Check, string FileExtension);

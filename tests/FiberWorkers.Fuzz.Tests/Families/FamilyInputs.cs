using System.Text.Encodings.Web;
using System.Text.Json;
using CsCheck;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Fuzz.Tests.Engine;
using FiberWorkers.Fuzz.Tests.Mutation;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Fuzz.Tests.Families;

/// <summary>
/// The family fuzz inputs: mutants of the seed corpus (our hand-written files, the bundled examples and the
/// regression files), and families whose equations come from <see cref="EquationGen"/>.
/// </summary>
internal static class FamilyInputs
{
    private const int MaxMutantBytes = (1 << 20) + (1 << 16);

    private static readonly Lazy<Seed[]> Seeds = new(LoadSeeds);

    private static readonly Lazy<Seed[]> ValidSeeds = new(() => [.. Seeds.Value.Where(s => s.IsValid)]);

    private static readonly string[] UnknownNames = ["x", "y", "z", "w"];
    private static readonly string[] ParameterNames = ["p", "q", "r"];
    private static readonly string[] ConstantNames = ["c", "k"];

    // Names an equation may use although no family here defines them: near misses and other spellings.
    private static readonly string[] StrayNames = ["u", "xx", "X", "p1", "_", "e", "NaN"];

    /// <summary>The seed files.</summary>
    public static IReadOnlyList<Seed> SeedFiles => Seeds.Value;

    /// <summary>A mutant of a seed: structural edits of its JSON tree, byte-level edits, or both; rarely random bytes.</summary>
    public static byte[] Mutant(SeededRandom random)
    {
        var seeds = Seeds.Value;
        if (random.Chance(0.03))
        {
            var noise = new byte[random.SkewedLength(2000)];
            for (var i = 0; i < noise.Length; i++)
            {
                noise[i] = random.Chance(0.7) ? (byte)random.Between(0x20, 0x7E) : (byte)random.NextInt(256);
            }

            return noise;
        }

        // Valid seeds are picked more often: a mutant of a valid file gets deeper into the reader.
        var seed = random.Chance(0.6) ? random.Pick(ValidSeeds.Value) : random.Pick(seeds);
        var donor = random.Pick(seeds);
        var bytes = seed.Bytes;
        if (seed.Tree is not null && random.Chance(0.7))
        {
            var trees = seeds.Where(s => s.Tree is not null).Select(s => s.Tree!).ToList();
            var tree = seed.Tree.Clone();
            for (var k = random.Between(1, 3); k > 0; k--)
            {
                tree = JsonMutator.Mutate(tree, random, trees);
            }

            bytes = Capped(tree.Write(random), seed.Bytes);
            if (random.Chance(0.25))
            {
                bytes = Capped(ByteMutator.Mutate(bytes, random, donor.Bytes), bytes);
            }

            return bytes;
        }

        for (var k = random.Between(1, 4); k > 0; k--)
        {
            bytes = Capped(ByteMutator.Mutate(bytes, random, donor.Bytes), bytes);
        }

        return bytes;
    }

    /// <summary>A well-formed family file (1–4 unknowns, 0–3 parameters, 0–2 constants) with generated equations.</summary>
    public static byte[] Generated(SeededRandom random)
    {
        var pcg = new PCG((uint)random.NextUInt64(), random.NextUInt64());
        var unknowns = UnknownNames[..random.Between(1, 4)];
        var parameters = ParameterNames[..random.Between(0, 3)];
        var constants = ConstantNames[..random.Between(0, 2)];
        var plain = random.Chance(0.5);
        string[] names = [.. unknowns, .. parameters, .. constants, .. !plain && random.Chance(0.3) ? StrayNames : []];
        var expression = EquationGen.Expression(names, plain);
        var equationCount = random.Chance(0.9) ? unknowns.Length : random.Between(0, 5);

        using var buffer = new MemoryStream();
        using (var writer = new Utf8JsonWriter(buffer, new JsonWriterOptions { Encoder = JavaScriptEncoder.UnsafeRelaxedJsonEscaping }))
        {
            writer.WriteStartObject();
            writer.WriteString("family", "generated");
            writer.WriteStartArray("unknowns");
            foreach (var name in unknowns)
            {
                writer.WriteStringValue(name);
            }

            writer.WriteEndArray();
            writer.WriteStartArray("parameters");
            foreach (var name in parameters)
            {
                var low = random.NextDouble(-5, 5);
                writer.WriteStartObject();
                writer.WriteString("name", name);
                writer.WriteNumber("low", low);
                writer.WriteNumber("high", random.Chance(0.95) ? low + random.NextDouble(0.01, 5) : low);
                writer.WriteEndObject();
            }

            writer.WriteEndArray();
            writer.WriteStartObject("constants");
            foreach (var name in constants)
            {
                double[] odd = [0, 1e-320, 1e300, -0.0];
                writer.WriteNumber(name, random.Chance(0.8) ? random.NextDouble(-3, 3) : random.Pick(odd));
            }

            writer.WriteEndObject();
            writer.WriteStartArray("equations");
            for (var i = 0; i < equationCount; i++)
            {
                writer.WriteStringValue(expression.Generate(pcg, null!, out _));
            }

            writer.WriteEndArray();
            if (random.Chance(0.2))
            {
                writer.WriteNumber("rootCount", random.Between(-1, 40));
            }

            writer.WriteEndObject();
        }

        return buffer.ToArray();
    }

    /// <summary>Mutants stop growing a little past the reader's size limit (which they still test): the mutant, or the input before it.</summary>
    internal static byte[] Capped(byte[] mutant, byte[] before) => mutant.Length <= MaxMutantBytes ? mutant : before;

    private static Seed[] LoadSeeds()
    {
        var files = Directory.GetFiles(FuzzPaths.FamilyCorpus, "*.json")
            .Concat(Directory.GetFiles(FuzzPaths.Examples, "*.json"))
            .Concat(Directory.Exists(FuzzPaths.Regressions) ? Directory.GetFiles(FuzzPaths.Regressions, "*.family.json") : [])
            .Order(StringComparer.Ordinal)
            .ToArray();
        if (files.Length == 0)
        {
            throw new InvalidOperationException($"no seed families in {FuzzPaths.FamilyCorpus} or {FuzzPaths.Examples}");
        }

        return [.. files.Select(f => new Seed(Path.GetFileName(f), File.ReadAllBytes(f)))];
    }

    /// <summary>One seed file: name, bytes, the parsed tree (null if not JSON) and whether the reader accepts it.</summary>
    internal sealed record Seed(string Name, byte[] Bytes)
    {
        public JsonTree? Tree { get; } = JsonTree.TryParse(Bytes);

        public bool IsValid { get; } = IsValidFamily(Bytes);

        private static bool IsValidFamily(byte[] bytes)
        {
            try
            {
                FamilyReader.Parse(bytes, "seed");
                return true;
            }
            catch (InputException)
            {
                return false;
            }
        }
    }
}

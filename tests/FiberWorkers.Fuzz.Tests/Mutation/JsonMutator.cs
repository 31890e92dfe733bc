using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Fuzz.Tests.Mutation;

/// <summary>
/// Structural mutations of a <see cref="JsonTree"/>: odd scalars and strings, mutated equation text, duplicated,
/// removed, renamed and added keys, array edits, deep nesting of brackets and subtrees spliced in from other files.
/// </summary>
internal static class JsonMutator
{
    private static readonly int[] NestingDepths = [2, 15, 16, 17, 64, 1000, 100_000];

    private static readonly string[] KnownKeys =
    [
        "family", "description", "unknowns", "parameters", "constants", "equations", "rootCount", "root_count", "name",
        "low", "high", "format", "version", "familyHash", "provenance", "seed", "pathsTracked", "completeness", "note",
        "method", "solutions", "@type", "",
    ];

    /// <summary>Applies one structural mutation; returns the (possibly new) root.</summary>
    public static JsonTree Mutate(JsonTree root, SeededRandom random, IReadOnlyList<JsonTree> donors)
    {
        var nodes = root.Nodes();
        var (node, parent, index) = nodes[random.NextInt(nodes.Count)];
        var strings = nodes.Where(n => n.Node is JsonRawTree { Raw: ['"', ..] } && n.Parent is not null).ToList();
        var objects = nodes.Where(n => n.Node is JsonObjectTree).Select(n => (JsonObjectTree)n.Node).ToList();
        var arrays = nodes.Where(n => n.Node is JsonArrayTree).Select(n => (JsonArrayTree)n.Node).ToList();
        JsonTree Put(JsonTree value)
        {
            if (parent is null)
            {
                return value;
            }

            JsonTree.Replace(parent, index, value);
            return root;
        }

        switch (random.NextInt(12))
        {
            case 0:
                return Put(new JsonRawTree(random.Pick(OddValues.JsonScalars)));
            case 1:
                if (strings.Count > 0)
                {
                    var s = random.Pick(strings);
                    JsonTree.Replace(s.Parent!, s.Index, new JsonRawTree(OddValues.JsonString(OddValues.StringContent(random), random)));
                }

                return root;
            case 2:
            case 3:
                // Equations are most of the reader's work, so their text is mutated most often.
                if (strings.Count > 0)
                {
                    var s = random.Pick(strings);
                    var content = ((JsonRawTree)s.Node).StringValue ?? "x";
                    var mutated = ExpressionMutator.Mutate(content, random);
                    JsonTree.Replace(s.Parent!, s.Index, new JsonRawTree(OddValues.JsonString(mutated, random)));
                }

                return root;
            case 4:
                if (objects.Count > 0 && random.Pick(objects) is { Properties.Count: > 0 } duplicated)
                {
                    var (key, value) = random.Pick(duplicated.Properties);
                    var copy = random.Chance(0.5) ? value.Clone() : new JsonRawTree(random.Pick(OddValues.JsonScalars));
                    duplicated.Properties.Insert(random.NextInt(duplicated.Properties.Count + 1), (key, copy));
                }

                return root;
            case 5:
                if (objects.Count > 0 && random.Pick(objects) is { Properties.Count: > 0 } trimmed)
                {
                    trimmed.Properties.RemoveAt(random.NextInt(trimmed.Properties.Count));
                    trimmed.RawKeys.Clear();
                }

                return root;
            case 6:
                if (objects.Count > 0 && random.Pick(objects) is { Properties.Count: > 0 } renamed)
                {
                    var at = random.NextInt(renamed.Properties.Count);
                    var (key, value) = renamed.Properties[at];
                    renamed.Properties[at] = (Rename(key, random, out var raw), value);
                    if (raw)
                    {
                        renamed.RawKeys.Add(at);
                    }
                }

                return root;
            case 7:
                if (arrays.Count > 0)
                {
                    var array = random.Pick(arrays);
                    var where = random.NextInt(array.Items.Count + 1);
                    if (array.Items.Count > 0 && random.Chance(0.4))
                    {
                        array.Items.RemoveAt(Math.Min(where, array.Items.Count - 1));
                    }
                    else if (array.Items.Count > 0 && random.Chance(0.6))
                    {
                        var item = random.Pick(array.Items);
                        var copies = random.Chance(0.1) && item is JsonRawTree { Raw.Length: < 1000 } ? random.Between(2, 60) : 1;
                        for (var c = 0; c < copies; c++)
                        {
                            array.Items.Insert(where, item.Clone());
                        }
                    }
                    else
                    {
                        array.Items.Insert(where, new JsonRawTree(random.Pick(OddValues.JsonScalars)));
                    }
                }

                return root;
            case 8:
                var depth = random.Pick(NestingDepths);
                var inner = node.WriteText(random);
                var nested = random.Chance(0.5)
                    ? new string('[', depth) + inner + new string(']', depth)
                    : string.Concat(Enumerable.Repeat("{\"a\":", depth)) + inner + new string('}', depth);
                return Put(new JsonRawTree(nested));
            case 9:
                if (donors.Count > 0)
                {
                    var donorNodes = random.Pick(donors).Nodes();
                    return Put(random.Pick(donorNodes).Node.Clone());
                }

                return root;
            case 10:
                if (objects.Count > 0)
                {
                    var target = random.Pick(objects);
                    var value = random.Chance(0.5) && donors.Count > 0
                        ? random.Pick(random.Pick(donors).Nodes()).Node.Clone()
                        : new JsonRawTree(random.Pick(OddValues.JsonScalars));
                    target.Properties.Insert(random.NextInt(target.Properties.Count + 1), (random.Pick(KnownKeys), value));
                    target.RawKeys.Clear();
                }

                return root;
            default:
                // Change a container's kind: an array's items as an object's values, or an object's values as an array.
                if (node is JsonArrayTree asArray)
                {
                    var obj = new JsonObjectTree();
                    for (var i = 0; i < asArray.Items.Count; i++)
                    {
                        obj.Properties.Add(($"k{i}", asArray.Items[i]));
                    }

                    return Put(obj);
                }

                if (node is JsonObjectTree asObject)
                {
                    var array = new JsonArrayTree();
                    array.Items.AddRange(asObject.Properties.Select(p => p.Value));
                    return Put(array);
                }

                return Put(new JsonRawTree(random.Pick(OddValues.JsonScalars)));
        }
    }

    private static string Rename(string key, SeededRandom random, out bool raw)
    {
        raw = false;
        switch (random.NextInt(8))
        {
            case 0:
                return key.Length > 0 ? char.ToUpperInvariant(key[0]) + key[1..] : "X";
            case 1:
                return key.Length > 1 ? key[..^1] : key + key;
            case 2:
                return key + "s";
            case 3:
                // Cyrillic 'а' (U+0430) for Latin 'a': looks the same, is another key.
                return key.Replace('a', '\u0430');
            case 4:
                return key == "rootCount" ? "root_count" : key == "root_count" ? "rootCount" : key.ToUpperInvariant();
            case 5:
                raw = true;
                return key;
            case 6:
                raw = true;
                return "\"" + key + "\u0001\"";
            default:
                return random.Pick(KnownKeys);
        }
    }
}

using System.Text;
using System.Text.Json;
using FiberWorkers.Solving.Randomness;

namespace FiberWorkers.Fuzz.Tests.Mutation;

/// <summary>
/// A JSON tree that can hold what a valid document cannot: duplicate keys, and any raw text as a scalar (bare NaN,
/// unbalanced brackets). Structural mutations edit it; <see cref="Write"/> prints it with varied whitespace.
/// </summary>
internal abstract class JsonTree
{
    /// <summary>Reads valid JSON; null when <paramref name="utf8"/> is not JSON this reader accepts.</summary>
    public static JsonTree? TryParse(byte[] utf8)
    {
        try
        {
            var span = utf8.AsSpan();
            if (span.StartsWith("\uFEFF"u8))
            {
                span = span[3..];
            }

            using var document = JsonDocument.Parse(span.ToArray(), new JsonDocumentOptions { MaxDepth = 64 });
            return From(document.RootElement);
        }
        catch (JsonException)
        {
            return null;
        }
        catch (InvalidOperationException)
        {
            // Invalid UTF-8 or lone surrogates inside strings surface when the text is read.
            return null;
        }
    }

    public abstract JsonTree Clone();

    /// <summary>Every node of the tree, this one first (the list is a snapshot; edits go through the parents).</summary>
    public List<(JsonTree Node, JsonTree? Parent, int Index)> Nodes()
    {
        var nodes = new List<(JsonTree, JsonTree?, int)>();
        var pending = new Stack<(JsonTree, JsonTree?, int)>();
        pending.Push((this, null, -1));
        while (pending.TryPop(out var entry))
        {
            nodes.Add(entry);
            switch (entry.Item1)
            {
                case JsonObjectTree obj:
                    for (var i = obj.Properties.Count - 1; i >= 0; i--)
                    {
                        pending.Push((obj.Properties[i].Value, obj, i));
                    }

                    break;
                case JsonArrayTree array:
                    for (var i = array.Items.Count - 1; i >= 0; i--)
                    {
                        pending.Push((array.Items[i], array, i));
                    }

                    break;
            }
        }

        return nodes;
    }

    /// <summary>Replaces child <paramref name="index"/> of <paramref name="parent"/>.</summary>
    public static void Replace(JsonTree parent, int index, JsonTree value)
    {
        switch (parent)
        {
            case JsonObjectTree obj:
                obj.Properties[index] = (obj.Properties[index].Key, value);
                break;
            case JsonArrayTree array:
                array.Items[index] = value;
                break;
        }
    }

    /// <summary>Prints the tree: compact, indented, or with random whitespace (spaces, tabs, CR LF).</summary>
    public byte[] Write(SeededRandom random) => Encoding.UTF8.GetBytes(WriteText(random));

    /// <summary>The printed text (lone surrogates in raw text become U+FFFD once encoded).</summary>
    public string WriteText(SeededRandom random)
    {
        var text = new StringBuilder();
        Write(text, random.NextInt(3), 0, random);
        return text.ToString();
    }

    internal abstract void Write(StringBuilder text, int style, int depth, SeededRandom random);

    protected static void Space(StringBuilder text, int style, int depth, SeededRandom random, bool newline)
    {
        switch (style)
        {
            case 1 when newline:
                text.Append('\n').Append(' ', 2 * Math.Min(depth, 64));
                break;
            case 2:
                string[] spaces = ["", " ", "\t", "\r\n", "\n  ", "   "];
                text.Append(random.Pick(spaces));
                break;
        }
    }

    private static JsonTree From(JsonElement element)
    {
        switch (element.ValueKind)
        {
            case JsonValueKind.Object:
                var obj = new JsonObjectTree();
                foreach (var property in element.EnumerateObject())
                {
                    obj.Properties.Add((property.Name, From(property.Value)));
                }

                return obj;
            case JsonValueKind.Array:
                var array = new JsonArrayTree();
                foreach (var item in element.EnumerateArray())
                {
                    array.Items.Add(From(item));
                }

                return array;
            default:
                return new JsonRawTree(element.GetRawText());
        }
    }
}

/// <summary>An object: properties in order, duplicates allowed.</summary>
internal sealed class JsonObjectTree : JsonTree
{
    public List<(string Key, JsonTree Value)> Properties { get; } = [];

    /// <summary>Indices of keys printed as they are, without quotes or escaping (a mutant's raw key text).</summary>
    public HashSet<int> RawKeys { get; } = [];

    public override JsonTree Clone()
    {
        var copy = new JsonObjectTree();
        foreach (var (key, value) in Properties)
        {
            copy.Properties.Add((key, value.Clone()));
        }

        copy.RawKeys.UnionWith(RawKeys);
        return copy;
    }

    internal override void Write(StringBuilder text, int style, int depth, SeededRandom random)
    {
        text.Append('{');
        for (var i = 0; i < Properties.Count; i++)
        {
            if (i > 0)
            {
                text.Append(',');
            }

            Space(text, style, depth + 1, random, newline: true);
            var (key, value) = Properties[i];
            text.Append(RawKeys.Contains(i) ? key : OddValues.JsonString(key, style: 3));
            Space(text, style, depth + 1, random, newline: false);
            text.Append(':');
            text.Append(style == 1 ? " " : string.Empty);
            value.Write(text, style, depth + 1, random);
        }

        if (Properties.Count > 0)
        {
            Space(text, style, depth, random, newline: true);
        }

        text.Append('}');
    }
}

/// <summary>An array.</summary>
internal sealed class JsonArrayTree : JsonTree
{
    public List<JsonTree> Items { get; } = [];

    public override JsonTree Clone()
    {
        var copy = new JsonArrayTree();
        foreach (var item in Items)
        {
            copy.Items.Add(item.Clone());
        }

        return copy;
    }

    internal override void Write(StringBuilder text, int style, int depth, SeededRandom random)
    {
        text.Append('[');
        for (var i = 0; i < Items.Count; i++)
        {
            if (i > 0)
            {
                text.Append(',');
                text.Append(style == 1 ? " " : string.Empty);
            }

            Space(text, style, depth + 1, random, newline: false);
            Items[i].Write(text, style, depth + 1, random);
        }

        text.Append(']');
    }
}

/// <summary>Any JSON text printed as is: a scalar as read, or injected raw text.</summary>
internal sealed class JsonRawTree(string raw) : JsonTree
{
    public string Raw { get; } = raw;

    /// <summary>The decoded content when this is a valid JSON string literal, else null.</summary>
    public string? StringValue
    {
        get
        {
            if (Raw.Length < 2 || Raw[0] != '"')
            {
                return null;
            }

            try
            {
                using var document = JsonDocument.Parse(Raw);
                return document.RootElement.ValueKind == JsonValueKind.String ? document.RootElement.GetString() : null;
            }
            catch (Exception e) when (e is JsonException or InvalidOperationException)
            {
                return null;
            }
        }
    }

    public override JsonTree Clone() => new JsonRawTree(Raw);

    internal override void Write(StringBuilder text, int style, int depth, SeededRandom random) => text.Append(Raw);
}

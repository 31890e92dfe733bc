using YamlDotNet.RepresentationModel;

namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>
/// A mutable YAML value (scalar, sequence or mapping) that remembers the file and line it came from, so that a
/// problem found after kustomize-style patching still names the line that wrote the value.
/// </summary>
internal sealed class YamlValue
{
    private YamlValue(string file, int line)
    {
        File = file;
        Line = line;
    }

    public string File { get; }

    public int Line { get; }

    /// <summary>The text of a scalar; null for a sequence, a mapping or a YAML null.</summary>
    public string? Scalar { get; private init; }

    public bool IsNull { get; private init; }

    public List<YamlValue>? Items { get; private init; }

    /// <summary>Mapping entries in file order.</summary>
    public List<KeyValuePair<string, YamlValue>>? Entries { get; private init; }

    public string Where => $"{File}:{Line}";

    /// <summary>The entry under <paramref name="key"/>, or null.</summary>
    public YamlValue? this[string key] => Entries?.FirstOrDefault(e => e.Key == key).Value;

    /// <summary>Follows a dotted path of mapping keys ("spec.template.spec"); null when any step is missing.</summary>
    public YamlValue? At(string path)
    {
        var node = this;
        foreach (var key in path.Split('.'))
        {
            node = node?[key];
        }

        return node;
    }

    /// <summary>The scalar at a dotted path, or null.</summary>
    public string? Text(string path) => At(path)?.Scalar;

    public IEnumerable<YamlValue> Each(string path) => At(path)?.Items ?? [];

    /// <summary>A scalar made by a check or a renderer, credited to the line that caused it.</summary>
    public static YamlValue MakeScalar(string text, string file, int line) => new(file, line) { Scalar = text };

    public void Set(string key, YamlValue value)
    {
        var entries = Entries ?? throw new InvalidOperationException($"{Where}: not a mapping");
        var index = entries.FindIndex(e => e.Key == key);
        if (index >= 0)
        {
            entries[index] = new(key, value);
        }
        else
        {
            entries.Add(new(key, value));
        }
    }

    public bool Remove(string key) => Entries?.RemoveAll(e => e.Key == key) > 0;

    /// <summary>Every document of a YAML file (a Kubernetes manifest may hold several, separated by ---).</summary>
    public static List<YamlValue> LoadAll(string path, string shownAs)
    {
        var stream = new YamlStream();
        using (var reader = new StreamReader(path))
        {
            try
            {
                stream.Load(reader);
            }
            catch (YamlDotNet.Core.YamlException e)
            {
                throw new InvalidDataException($"{shownAs}:{e.Start.Line}: not valid YAML: {e.Message}", e);
            }
        }

        return [.. stream.Documents.Select(d => From(d.RootNode, shownAs))];
    }

    private static YamlValue From(YamlNode node, string file)
    {
        var line = (int)node.Start.Line;
        return node switch
        {
            YamlScalarNode scalar when scalar.Style == YamlDotNet.Core.ScalarStyle.Plain && scalar.Value is null or "" or "~" or "null" =>
                new YamlValue(file, line) { IsNull = true },
            YamlScalarNode scalar => new YamlValue(file, line) { Scalar = scalar.Value ?? string.Empty },
            YamlSequenceNode sequence => new YamlValue(file, line) { Items = [.. sequence.Children.Select(c => From(c, file))] },
            YamlMappingNode mapping => new YamlValue(file, line)
            {
                Entries = [.. mapping.Children.Select(c => new KeyValuePair<string, YamlValue>(((YamlScalarNode)c.Key).Value ?? string.Empty, From(c.Value, file)))],
            },
            _ => throw new InvalidDataException($"{file}:{line}: aliases and other YAML features are not used in deploy/"),
        };
    }
}

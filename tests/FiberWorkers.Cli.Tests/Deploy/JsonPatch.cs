namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>The RFC 6902 operations the Kubernetes overlays use (test, add, replace, remove), on a <see cref="YamlValue"/>.</summary>
internal static class JsonPatch
{
    public static void Apply(YamlValue document, YamlValue operation, List<string> problems)
    {
        var op = operation.Text("op");
        var path = operation.Text("path");
        var value = operation["value"];
        if (op is null || path is null || !path.StartsWith('/'))
        {
            problems.Add($"{operation.Where}: a patch operation needs 'op' and a 'path' starting with '/'");
            return;
        }

        var keys = path[1..].Split('/').Select(k => k.Replace("~1", "/", StringComparison.Ordinal).Replace("~0", "~", StringComparison.Ordinal)).ToArray();
        var parent = document;
        foreach (var key in keys[..^1])
        {
            parent = Child(parent, key);
            if (parent is null)
            {
                problems.Add($"{operation.Where}: {op} {path}: '{key}' does not exist in {document.Text("kind")} {document.Text("metadata.name")}");
                return;
            }
        }

        var last = keys[^1];
        var current = Child(parent, last);
        switch (op)
        {
            case "test" when current is null || value is null || !Same(current, value):
                problems.Add($"{operation.Where}: test {path} failed: expected {Show(value)}, the base has {Show(current)} ({current?.Where ?? "missing"})");
                break;
            case "test":
                break;
            case "replace" or "remove" when current is null:
                problems.Add($"{operation.Where}: {op} {path}: nothing there to {op}");
                break;
            case "replace" or "add" when value is null:
                problems.Add($"{operation.Where}: {op} {path} has no value");
                break;
            case "replace" or "add" when parent.Entries is not null:
                parent.Set(last, value!);
                break;
            case "replace":
                parent.Items![int.Parse(last, System.Globalization.CultureInfo.InvariantCulture)] = value!;
                break;
            case "add" when last == "-":
                parent.Items!.Add(value!);
                break;
            case "add" when int.TryParse(last, System.Globalization.CultureInfo.InvariantCulture, out var index) && index <= parent.Items!.Count:
                parent.Items.Insert(index, value!);
                break;
            case "remove" when parent.Entries is not null:
                parent.Remove(last);
                break;
            case "remove":
                parent.Items!.RemoveAt(int.Parse(last, System.Globalization.CultureInfo.InvariantCulture));
                break;
            default:
                problems.Add($"{operation.Where}: {op} {path}: not an operation the deploy test renders");
                break;
        }
    }

    private static YamlValue? Child(YamlValue node, string key) =>
        node.Entries is not null ? node[key]
        : node.Items is { } items && int.TryParse(key, System.Globalization.CultureInfo.InvariantCulture, out var index) && index >= 0 && index < items.Count ? items[index]
        : null;

    private static bool Same(YamlValue a, YamlValue b) =>
        a.Scalar is not null ? a.Scalar == b.Scalar
        : a.Items is not null ? b.Items is not null && a.Items.Count == b.Items.Count && a.Items.Zip(b.Items).All(p => Same(p.First, p.Second))
        : a.Entries is not null ? b.Entries is not null && a.Entries.Count == b.Entries.Count && a.Entries.All(e => b[e.Key] is { } other && Same(e.Value, other))
        : b.IsNull;

    private static string Show(YamlValue? node) => node?.Scalar is { } text ? $"'{text}'" : node is null ? "nothing" : "a structure";
}

namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>
/// Renders a kustomization the way <c>kubectl apply -k</c> would, for the few features deploy/kubernetes uses:
/// <c>resources</c> (files and directories with their own kustomization), <c>namespace</c>, <c>labels</c>,
/// <c>images</c> and RFC 6902 <c>patches</c> with a target (including their <c>test</c> operations). Any other field
/// is reported, so that a new feature cannot slip past the checks unrendered.
/// </summary>
internal sealed class KustomizeRender
{
    private static readonly HashSet<string> KnownFields = ["apiVersion", "kind", "resources", "namespace", "labels", "images", "patches"];

    private KustomizeRender(string directory)
    {
        Directory = directory;
    }

    /// <summary>The kustomization's directory, relative to the repository (e.g. deploy/kubernetes/postgres).</summary>
    public string Directory { get; }

    public List<YamlValue> Resources { get; } = [];

    /// <summary>Image names the kustomizations rewrite (their <c>images[].name</c>).</summary>
    public HashSet<string> Images { get; } = [];

    /// <summary>Every file the render read, relative to the repository.</summary>
    public HashSet<string> FilesRead { get; } = [];

    public static KustomizeRender Render(DeployFiles files, string directory, List<string> problems)
    {
        var render = new KustomizeRender(directory);
        render.Add(files, directory, problems, []);
        return render;
    }

    private void Add(DeployFiles files, string directory, List<string> problems, HashSet<string> visiting)
    {
        var file = $"{directory}/kustomization.yaml";
        if (!visiting.Add(directory))
        {
            problems.Add($"{file}:1: includes itself through its resources");
            return;
        }

        FilesRead.Add(file);
        var kustomization = YamlValue.LoadAll(files.Full(file), file).Single();
        foreach (var (key, value) in kustomization.Entries ?? [])
        {
            if (!KnownFields.Contains(key))
            {
                problems.Add($"{value.Where}: kustomization field '{key}' is not understood by the deploy test's renderer (KustomizeRender); teach it before using it");
            }
        }

        var start = Resources.Count;
        foreach (var resource in kustomization.Each("resources"))
        {
            var relative = Normalize($"{directory}/{resource.Scalar}");
            if (System.IO.Directory.Exists(files.Full(relative)))
            {
                Add(files, relative, problems, visiting);
            }
            else if (File.Exists(files.Full(relative)))
            {
                FilesRead.Add(relative);
                Resources.AddRange(YamlValue.LoadAll(files.Full(relative), relative).Where(d => !d.IsNull));
            }
            else
            {
                problems.Add($"{resource.Where}: resource '{resource.Scalar}' does not exist");
            }
        }

        foreach (var label in kustomization.Each("labels"))
        {
            // Only metadata labels are rendered: with includeSelectors the selectors would change too.
            if (label.Text("includeSelectors") is "true" || label.Text("includeTemplates") is "true")
            {
                problems.Add($"{label.Where}: labels with includeSelectors/includeTemplates are not rendered by the deploy test");
            }
        }

        foreach (var image in kustomization.Each("images"))
        {
            Images.Add(image.Text("name") ?? string.Empty);
        }

        foreach (var patch in kustomization.Each("patches"))
        {
            ApplyPatch(files, directory, patch, problems);
        }

        if (kustomization.Text("namespace") is { } ns)
        {
            foreach (var resource in Resources.Skip(start).Where(r => r.Text("kind") != "Namespace"))
            {
                resource.At("metadata")?.Set("namespace", YamlValue.MakeScalar(ns, kustomization.File, kustomization.Line));
            }
        }

        visiting.Remove(directory);
    }

    private void ApplyPatch(DeployFiles files, string directory, YamlValue patch, List<string> problems)
    {
        if (patch.Text("path") is not { } path || patch["target"] is not { } target)
        {
            problems.Add($"{patch.Where}: only patches with a path and a target (RFC 6902) are rendered by the deploy test");
            return;
        }

        var relative = Normalize($"{directory}/{path}");
        if (!File.Exists(files.Full(relative)))
        {
            problems.Add($"{patch.Where}: patch file '{path}' does not exist");
            return;
        }

        FilesRead.Add(relative);
        var operations = YamlValue.LoadAll(files.Full(relative), relative).Single();
        if (operations.Items is null)
        {
            problems.Add($"{relative}:{operations.Line}: a targeted patch here must be an RFC 6902 list of operations");
            return;
        }

        var matches = Resources.Where(r => Matches(r, target)).ToList();
        if (matches.Count != 1)
        {
            problems.Add($"{target.Where}: the patch target matches {matches.Count} resources, not one");
            return;
        }

        foreach (var operation in operations.Items)
        {
            JsonPatch.Apply(matches[0], operation, problems);
        }
    }

    private static bool Matches(YamlValue resource, YamlValue target)
    {
        var apiVersion = target.Text("group") is { Length: > 0 } group ? $"{group}/{target.Text("version")}" : target.Text("version");
        return (target.Text("kind") is not { } kind || kind == resource.Text("kind"))
            && (target.Text("name") is not { } name || name == resource.Text("metadata.name"))
            && (apiVersion is null || apiVersion == resource.Text("apiVersion"));
    }

    private static string Normalize(string path)
    {
        var parts = new List<string>();
        foreach (var part in path.Split('/'))
        {
            if (part == "..")
            {
                parts.RemoveAt(parts.Count - 1);
            }
            else if (part is not ("." or ""))
            {
                parts.Add(part);
            }
        }

        return string.Join('/', parts);
    }
}

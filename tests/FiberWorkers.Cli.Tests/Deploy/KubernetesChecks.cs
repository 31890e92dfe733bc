using System.Globalization;
using System.Text.RegularExpressions;
using FiberWorkers.Cluster.Hosting;

namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>
/// Renders every kustomization under deploy/kubernetes and checks the result: each container's <c>fiber</c> arguments
/// against the command tree, <c>$(VAR)</c> against the container's env, the <c>--listen</c> port against container
/// ports, gRPC probes and Services, <c>--threads</c> against the CPU limit, the store against a persistent volume,
/// <c>--coordinator</c> URLs against the coordinator's Service, and the grace period against the server's shutdown
/// timeout.
/// </summary>
internal static partial class KubernetesChecks
{
    /// <summary>What the health test and the image check need from the manifests.</summary>
    internal sealed record Findings(List<string> Problems, List<(string Where, string Service)> ProbeServices, List<(string Where, int Port)> ContainerPorts);

    private sealed record Container(string Render, string Namespace, YamlValue Workload, YamlValue Node, FiberInvocation? Fiber, Dictionary<string, int> PortsByName, List<int> Ports);

    private sealed record Service(string Render, string Namespace, YamlValue Node);

    public static Findings Run(DeployFiles files, FiberCommandCheck fiber, int shutdownSeconds)
    {
        var problems = new List<string>();
        var findings = new Findings(problems, [], []);
        var directories = files.All()
            .Where(f => f.StartsWith("deploy/kubernetes/", StringComparison.Ordinal) && f.EndsWith("/kustomization.yaml", StringComparison.Ordinal))
            .Select(f => f[..f.LastIndexOf('/')])
            .ToList();
        if (directories.Count == 0)
        {
            problems.Add("deploy/kubernetes:1: no kustomization.yaml");
            return findings;
        }

        var read = new HashSet<string>(StringComparer.Ordinal);
        var containers = new List<Container>();
        var services = new List<Service>();
        foreach (var directory in directories)
        {
            var render = KustomizeRender.Render(files, directory, problems);
            read.UnionWith(render.FilesRead);
            foreach (var resource in render.Resources)
            {
                var ns = resource.Text("metadata.namespace") ?? "default";
                switch (resource.Text("kind"))
                {
                    case "Service":
                        services.Add(new Service(directory, ns, resource));
                        break;
                    case "Deployment" or "StatefulSet" or "Job":
                        containers.AddRange(CheckWorkload(directory, ns, resource, render, fiber, shutdownSeconds, findings));
                        break;
                }
            }
        }

        foreach (var file in files.All().Where(f => f.StartsWith("deploy/kubernetes/", StringComparison.Ordinal) && f.EndsWith(".yaml", StringComparison.Ordinal)))
        {
            if (!read.Contains(file))
            {
                problems.Add($"{file}:1: not reached from any kustomization.yaml, so nothing applies it");
            }
        }

        foreach (var service in services)
        {
            CheckService(service, containers.Where(c => c.Render == service.Render && c.Namespace == service.Namespace).ToList(), problems);
        }

        foreach (var statefulSet in containers.Select(c => (c.Render, c.Namespace, c.Workload)).Distinct().Where(w => w.Workload.Text("kind") == "StatefulSet"))
        {
            var name = statefulSet.Workload.Text("spec.serviceName");
            var governing = services.FirstOrDefault(s => s.Render == statefulSet.Render && s.Namespace == statefulSet.Namespace && s.Node.Text("metadata.name") == name);
            if (governing is null || governing.Node.Text("spec.clusterIP") != "None")
            {
                problems.Add($"{statefulSet.Workload.At("spec.serviceName")?.Where ?? statefulSet.Workload.Where}: serviceName '{name}' must name a headless Service (clusterIP: None) of the same render");
            }
        }

        foreach (var container in containers.Where(c => c.Fiber is not null))
        {
            if (container.Fiber!.Url("--coordinator") is { } url)
            {
                CheckCoordinatorUrl(container, url, services, containers, problems);
            }
        }

        return findings;
    }

    private static List<Container> CheckWorkload(string directory, string ns, YamlValue workload, KustomizeRender render, FiberCommandCheck fiber, int shutdownSeconds, Findings findings)
    {
        var problems = findings.Problems;
        var pod = workload.At("spec.template.spec");
        var labels = workload.At("spec.template.metadata.labels");
        if (pod is null)
        {
            problems.Add($"{workload.Where}: {workload.Text("kind")} without spec.template.spec");
            return [];
        }

        if (workload.Text("kind") != "Job")
        {
            foreach (var (key, value) in workload.At("spec.selector.matchLabels")?.Entries ?? [])
            {
                if (labels?[key]?.Scalar != value.Scalar)
                {
                    problems.Add($"{value.Where}: the selector's {key}={value.Scalar} is not a label of the pod template");
                }
            }
        }

        var persistent = new HashSet<string>(workload.Each("spec.volumeClaimTemplates").Select(v => v.Text("metadata.name") ?? string.Empty), StringComparer.Ordinal);
        var volumes = new HashSet<string>(persistent, StringComparer.Ordinal);
        foreach (var volume in pod.Each("volumes"))
        {
            volumes.Add(volume.Text("name") ?? string.Empty);
            if (volume["persistentVolumeClaim"] is not null)
            {
                persistent.Add(volume.Text("name") ?? string.Empty);
            }
        }

        var nonRoot = pod.Text("securityContext.runAsNonRoot") == "true";
        var result = new List<Container>();
        foreach (var node in pod.Each("containers"))
        {
            var name = node.Text("name");
            if (node.Text("image") is { } image && !render.Images.Contains(image))
            {
                problems.Add($"{node.At("image")!.Where}: image '{image}' is not rewritten by an images: entry of {directory}/kustomization.yaml");
            }

            if (node["command"] is { } command)
            {
                problems.Add($"{command.Where}: 'command' replaces the image's ENTRYPOINT (the fiber executable); give only args");
            }

            if (!nonRoot && node.Text("securityContext.runAsNonRoot") != "true")
            {
                problems.Add($"{node.Where}: container '{name}' may run as root: set securityContext.runAsNonRoot: true");
            }

            var environment = ContainerEnvironment(node, ns, problems);
            var words = new List<(string Text, string Where)>();
            foreach (var arg in node.Each("args"))
            {
                words.Add((Substitute(arg.Scalar ?? string.Empty, environment, arg.Where, problems), arg.Where));
            }

            var ports = new Dictionary<string, int>(StringComparer.Ordinal);
            var portList = new List<int>();
            foreach (var port in node.Each("ports"))
            {
                var number = int.Parse(port.Text("containerPort") ?? "0", CultureInfo.InvariantCulture);
                portList.Add(number);
                findings.ContainerPorts.Add((port.Where, number));
                if (port.Text("name") is { } portName)
                {
                    ports[portName] = number;
                }
            }

            foreach (var mount in node.Each("volumeMounts"))
            {
                if (!volumes.Contains(mount.Text("name") ?? string.Empty))
                {
                    problems.Add($"{mount.Where}: volumeMount '{mount.Text("name")}' names no volume or volumeClaimTemplate of this pod");
                }
            }

            var where = node.At("args")?.Where ?? node.Where;
            var invocation = words.Count == 0 ? null : fiber.Check(words, where, environment.Keys.ToHashSet(StringComparer.Ordinal), problems);
            if (words.Count == 0)
            {
                problems.Add($"{node.Where}: container '{name}' has no args: which fiber command does it run?");
            }
            else if (invocation is not null && !FiberCommandCheck.Deployed.Contains(invocation.Command))
            {
                problems.Add($"{where}: 'fiber {invocation.Command}' is not one of the commands a deployment runs ({string.Join(", ", FiberCommandCheck.Deployed)})");
            }

            result.Add(new Container(directory, ns, workload, node, invocation, ports, portList));
            if (invocation?.Command is "serve coordinator" or "serve worker")
            {
                CheckServer(workload, pod, node, invocation, portList, persistent, shutdownSeconds, findings);
            }
        }

        return result;
    }

    /// <summary>The port of <c>--admin-listen</c>, or null when it is absent or not an address.</summary>
    private static int? AdminPort(FiberInvocation invocation)
    {
        if (invocation["--admin-listen"] is not { } text)
        {
            return null;
        }

        try
        {
            return ListenAddress.Parse(text, "--admin-listen").Port;
        }
        catch (FormatException)
        {
            return null;
        }
    }

    private static void CheckServer(YamlValue workload, YamlValue pod, YamlValue node, FiberInvocation invocation, List<int> ports, HashSet<string> persistent, int shutdownSeconds, Findings findings)
    {
        var problems = findings.Problems;
        var listen = invocation.Listen;
        if (listen is not null)
        {
            if (!ports.Contains(listen.Port))
            {
                problems.Add($"{node.At("ports")?.Where ?? node.Where}: no containerPort is {listen.Port}, the port of --listen {listen} ({invocation.WhereOf("--listen")})");
            }

            var admin = AdminPort(invocation);
            foreach (var port in node.Each("ports"))
            {
                if (port.Text("containerPort") is { } text && int.Parse(text, CultureInfo.InvariantCulture) is var number && number != listen.Port && number != admin)
                {
                    problems.Add($"{port.At("containerPort")!.Where}: containerPort {text} is not the port fiber listens on ({listen.Port}, {invocation.WhereOf("--listen")}) nor its --admin-listen port");
                }
            }

            // Prometheus scrapes the admin listener (/metrics): the annotation must name its port, which must be a container port.
            var annotation = workload.At("spec.template.metadata.annotations")?["prometheus.io/port"];
            if (annotation is not null && (admin is null || annotation.Scalar != admin.Value.ToString(CultureInfo.InvariantCulture)))
            {
                problems.Add($"{annotation.Where}: prometheus.io/port {annotation.Scalar} is not the port of --admin-listen ({invocation["--admin-listen"] ?? "not given"}, {invocation.WhereOf("--admin-listen")})");
            }
            else if (admin is { } adminPort && !ports.Contains(adminPort))
            {
                problems.Add($"{node.At("ports")?.Where ?? node.Where}: no containerPort is {adminPort}, the port of --admin-listen ({invocation.WhereOf("--admin-listen")})");
            }
        }

        foreach (var (probeName, service) in new[] { ("readinessProbe", "ready"), ("livenessProbe", string.Empty) })
        {
            if (node[probeName] is not { } probe)
            {
                problems.Add($"{node.Where}: container '{node.Text("name")}' has no {probeName}");
                continue;
            }

            // A TLS listener cannot be probed natively (kubelet's gRPC probes speak plaintext only): ask the admin listener.
            if (probe["httpGet"] is { } http)
            {
                var adminPort = AdminPort(invocation);
                var path = service.Length == 0 ? "/healthz" : "/readyz";
                if (adminPort is null || http.Text("port") != adminPort.Value.ToString(CultureInfo.InvariantCulture))
                {
                    problems.Add($"{http.At("port")?.Where ?? http.Where}: {probeName} asks port {http.Text("port") ?? "(none)"}, but the admin listener (--admin-listen) is {invocation["--admin-listen"] ?? "not given"} ({invocation.WhereOf("--admin-listen")})");
                }

                var scheme = invocation["--tls-cert"] is null ? "HTTP" : "HTTPS";
                if ((http.Text("scheme") ?? "HTTP") != scheme)
                {
                    problems.Add($"{http.At("scheme")?.Where ?? http.Where}: {probeName} asks with scheme {http.Text("scheme") ?? "HTTP"}, but the admin listener speaks {scheme} (it serves the gRPC listener's TLS)");
                }

                var askedPath = http.Text("path") ?? "/";
                findings.ProbeServices.Add((http.At("path")?.Where ?? http.Where, askedPath));
                if (askedPath != path)
                {
                    problems.Add($"{http.At("path")?.Where ?? http.Where}: {probeName} asks {askedPath}; the admin listener answers {path} for {(service.Length == 0 ? "liveness" : "readiness")}");
                }

                continue;
            }

            if (probe["grpc"] is not { } grpc)
            {
                problems.Add($"{probe.Where}: {probeName} should be a native gRPC probe (grpc: {{port, service}}) or, with TLS, an httpGet of the admin listener");
                continue;
            }

            if (invocation["--tls-cert"] is not null)
            {
                problems.Add($"{grpc.Where}: {probeName} is a native gRPC probe, which cannot speak TLS, but fiber listens with --tls-cert ({invocation.WhereOf("--tls-cert")}): probe the admin listener's {(service.Length == 0 ? "/healthz" : "/readyz")} with httpGet");
                continue;
            }

            var port = grpc.Text("port");
            if (listen is not null && port != listen.Port.ToString(CultureInfo.InvariantCulture))
            {
                problems.Add($"{grpc.At("port")?.Where ?? grpc.Where}: {probeName} asks port {port ?? "(none)"}, but fiber listens on {listen.Port} ({invocation.WhereOf("--listen")})");
            }

            var asked = grpc.Text("service") ?? string.Empty;
            findings.ProbeServices.Add((grpc.At("service")?.Where ?? grpc.Where, asked));
            if (asked != service)
            {
                problems.Add($"{grpc.At("service")?.Where ?? grpc.Where}: {probeName} asks health service '{asked}'; the servers answer '{service}' for {(service.Length == 0 ? "liveness" : "readiness")}");
            }
        }

        var grace = pod.Text("terminationGracePeriodSeconds");
        if (grace is null || int.Parse(grace, CultureInfo.InvariantCulture) < shutdownSeconds + 5)
        {
            problems.Add($"{pod.At("terminationGracePeriodSeconds")?.Where ?? pod.Where}: terminationGracePeriodSeconds {grace ?? "(unset)"} should exceed the server's {shutdownSeconds} s shutdown timeout by at least 5 s, so SIGKILL does not cut calls in flight short");
        }

        var limit = Cores(node.Text("resources.limits.cpu"));
        var request = Cores(node.Text("resources.requests.cpu"));
        var cpuWhere = node.At("resources.limits.cpu")?.Where ?? node.At("resources")?.Where ?? node.Where;
        if (limit is null || request is null || node.Text("resources.limits.memory") is null || node.Text("resources.requests.memory") is null)
        {
            problems.Add($"{cpuWhere}: a server container needs cpu and memory requests and limits");
        }
        else
        {
            if (request != limit)
            {
                problems.Add($"{cpuWhere}: cpu request {request} and limit {limit} differ; CPU-bound servers get whole cores (requests = limits)");
            }

            var threads = invocation["--threads"];
            if (threads is null || !double.TryParse(threads, NumberStyles.Float, CultureInfo.InvariantCulture, out var count) || count != limit)
            {
                problems.Add($"{invocation.WhereOf("--threads")}: --threads {threads ?? "(default: every core of the node)"} should equal the cpu limit {limit} ({cpuWhere})");
            }
        }

        if (invocation["--store"] is { } store && store.StartsWith("sqlite:", StringComparison.OrdinalIgnoreCase))
        {
            var path = store["sqlite:".Length..];
            var mount = node.Each("volumeMounts").FirstOrDefault(m => m.Text("mountPath") is { } dir && path.StartsWith(dir.TrimEnd('/') + "/", StringComparison.Ordinal));
            if (mount is null || !persistent.Contains(mount.Text("name") ?? string.Empty))
            {
                problems.Add($"{invocation.WhereOf("--store")}: the SQLite file {path} is not on a persistent volume (volumeClaimTemplates or persistentVolumeClaim) of {workload.Text("metadata.name")}: the atlas would be lost with the pod");
            }
        }
    }

    private static void CheckService(Service service, List<Container> containers, List<string> problems)
    {
        var node = service.Node;
        var selector = node.At("spec.selector")?.Entries ?? [];
        var selected = containers.Where(c => selector.Count > 0 && selector.All(s => Label(c.Workload, s.Key) == s.Value.Scalar)).ToList();
        if (selected.Count == 0)
        {
            problems.Add($"{node.At("spec.selector")?.Where ?? node.Where}: Service {node.Text("metadata.name")} selects no pod of its render");
            return;
        }

        foreach (var port in node.Each("spec.ports"))
        {
            var target = port.Text("targetPort") ?? port.Text("port") ?? string.Empty;
            foreach (var container in selected)
            {
                var resolved = int.TryParse(target, CultureInfo.InvariantCulture, out var number) ? (int?)number : container.PortsByName.TryGetValue(target, out var named) ? named : null;
                if (resolved is null || !container.Ports.Contains(resolved.Value))
                {
                    problems.Add($"{port.Where}: Service {node.Text("metadata.name")} targets port '{target}', which container '{container.Node.Text("name")}' ({container.Node.Where}) does not expose");
                }
            }
        }
    }

    /// <summary>A --coordinator URL must name a Service that leads to a coordinator listening on the port it reaches.</summary>
    private static void CheckCoordinatorUrl(Container client, Uri url, List<Service> services, List<Container> containers, List<string> problems)
    {
        var where = client.Fiber!.WhereOf("--coordinator");
        var parts = url.Host.Split('.');
        var ns = parts.Length >= 2 ? parts[1] : client.Namespace;
        var service = services
            .Where(s => s.Namespace == ns && s.Node.Text("metadata.name") == parts[0] && s.Node.Text("spec.clusterIP") != "None")
            .OrderBy(s => s.Render == client.Render ? 0 : 1)
            .FirstOrDefault();
        if (service is null)
        {
            problems.Add($"{where}: --coordinator {url}: no Service '{parts[0]}' in namespace {ns} among the manifests");
            return;
        }

        var port = service.Node.Each("spec.ports").FirstOrDefault(p => p.Text("port") == url.Port.ToString(CultureInfo.InvariantCulture));
        if (port is null)
        {
            problems.Add($"{where}: --coordinator {url}: Service {parts[0]} ({service.Node.Where}) has no port {url.Port}");
            return;
        }

        var target = port.Text("targetPort") ?? port.Text("port")!;
        var selector = service.Node.At("spec.selector")?.Entries ?? [];
        var coordinators = containers
            .Where(c => c.Render == service.Render && c.Namespace == service.Namespace && selector.All(s => Label(c.Workload, s.Key) == s.Value.Scalar))
            .ToList();
        if (coordinators.Count == 0 || coordinators.Any(c => c.Fiber?.Command != "serve coordinator"))
        {
            problems.Add($"{where}: --coordinator {url}: Service {parts[0]} ({service.Node.Where}) does not lead to 'fiber serve coordinator' containers only");
            return;
        }

        foreach (var coordinator in coordinators)
        {
            var resolved = int.TryParse(target, CultureInfo.InvariantCulture, out var number) ? number : coordinator.PortsByName.GetValueOrDefault(target);
            if (coordinator.Fiber!.Listen?.Port != resolved)
            {
                problems.Add($"{where}: --coordinator {url} reaches port {resolved} of the coordinator, which listens on {coordinator.Fiber.Listen?.Port} ({coordinator.Fiber.WhereOf("--listen")})");
            }
        }
    }

    /// <summary>The container's env as names with sample values (what the downward API or a Secret would give).</summary>
    private static Dictionary<string, string> ContainerEnvironment(YamlValue container, string ns, List<string> problems)
    {
        var environment = new Dictionary<string, string>(StringComparer.Ordinal);
        if (container["envFrom"] is { } envFrom)
        {
            problems.Add($"{envFrom.Where}: envFrom hides which variables the container gets; list them under env so the deploy test can check $(VAR) and postgres:env:VAR");
        }

        foreach (var entry in container.Each("env"))
        {
            var name = entry.Text("name") ?? string.Empty;
            var value = entry["value"] is { } literal ? Substitute(literal.Scalar ?? string.Empty, environment, literal.Where, problems)
                : entry.Text("valueFrom.fieldRef.fieldPath") switch
                {
                    "status.podIP" => "10.244.1.17",
                    "status.hostIP" => "10.0.0.5",
                    "metadata.name" => "fiber-worker-5d8f7-abcde",
                    "metadata.namespace" => ns,
                    null => "from-a-secret-or-config-map",
                    var other => $"field-{other}",
                };
            environment[name] = value;
        }

        return environment;
    }

    /// <summary>Kubernetes' <c>$(VAR)</c> expansion in args and env values; <c>$$</c> escapes.</summary>
    private static string Substitute(string text, Dictionary<string, string> environment, string where, List<string> problems) =>
        Reference().Replace(text, match =>
        {
            if (match.Value.StartsWith("$$", StringComparison.Ordinal))
            {
                return match.Value[1..];
            }

            var name = match.Groups["name"].Value;
            if (environment.TryGetValue(name, out var value))
            {
                return value;
            }

            problems.Add($"{where}: $({name}) is not defined in the container's env (above this line), so Kubernetes would pass it on literally");
            return match.Value;
        });

    /// <summary>A pod template label (label keys hold dots, so not through a dotted path).</summary>
    private static string? Label(YamlValue workload, string key) => workload.At("spec.template.metadata.labels")?[key]?.Scalar;

    private static double? Cores(string? quantity) =>
        quantity is null ? null
        : quantity.EndsWith('m') ? double.Parse(quantity[..^1], CultureInfo.InvariantCulture) / 1000
        : double.Parse(quantity, CultureInfo.InvariantCulture);

    [GeneratedRegex(@"\$?\$\((?<name>[A-Za-z_][A-Za-z0-9_]*)\)")]
    private static partial Regex Reference();
}

using System.Net;
using System.Text.RegularExpressions;
using FiberWorkers.Cluster.Hosting;
using Grpc.Core;
using Grpc.Health.V1;
using Grpc.Net.Client;

namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>
/// Keeps deploy/ honest: every manifest, unit, script and README there is checked against the real <c>fiber</c>
/// command tree (<see cref="CommandLine.Build"/>) and against each other, and each check is shown to fail, naming
/// file and line, on a copy of deploy/ with one thing broken.
/// </summary>
public sealed class ManifestTests
{
    [Fact]
    public void Every_file_in_deploy_is_one_a_check_reads() =>
        AssertNone(DeployChecks.Coverage(DeployFiles.Repository));

    [Fact]
    public void Kubernetes_manifests_agree_with_the_fiber_command_and_with_each_other() =>
        AssertNone(DeployChecks.Kubernetes(DeployFiles.Repository));

    [Fact]
    public void Slurm_script_passes_bash_n_and_its_fiber_commands_agree_with_the_cli() =>
        AssertNone(DeployChecks.Slurm(DeployFiles.Repository));

    [Fact]
    public void Systemd_units_agree_with_the_fiber_command_and_the_environment_file_example() =>
        AssertNone(DeployChecks.Systemd(DeployFiles.Repository));

    [Fact]
    public void Container_image_publishes_the_cli_and_its_project_references_and_runs_as_non_root() =>
        AssertNone(DeployChecks.Image(DeployFiles.Repository));

    [Fact]
    public void Readme_commands_paths_and_caution_line_are_right() =>
        AssertNone(DeployChecks.Readmes(DeployFiles.Repository));

    [Fact]
    public async Task Kubernetes_probes_ask_health_services_a_real_server_answers()
    {
        // Arrange: the services the manifests' probes name, and a server built the way both cluster servers are.
        var files = DeployFiles.Repository;
        var problems = new List<string>();
        var findings = KubernetesChecks.Run(files, new FiberCommandCheck(files, problems), DeployChecks.ShutdownSeconds(files, problems));
        Assert.NotEmpty(findings.ProbeServices);
        using var log = new Serilog.LoggerConfiguration().CreateLogger();
        await using var host = await GrpcHost.StartAsync(
            new HostSettings { Listen = new ListenAddress(IPAddress.Loopback, 0), Logger = log, Ready = () => true, AdminListen = new ListenAddress(IPAddress.Loopback, 0) },
            _ => { },
            _ => { });
        using var channel = GrpcChannel.ForAddress(host.Address);
        var health = new Health.HealthClient(channel);

        // Probes of a TLS listener ask the admin listener's paths instead: each answers 200, an unknown path 404.
        using var http = new HttpClient { BaseAddress = host.AdminAddress };
        foreach (var (where, path) in findings.ProbeServices.Where(p => p.Service.StartsWith('/')).DistinctBy(p => p.Service))
        {
            var answer = await http.GetAsync(new Uri(path, UriKind.Relative));
            Assert.True(answer.StatusCode == HttpStatusCode.OK, $"{where}: the admin listener answers {path} with {answer.StatusCode}");
        }

        Assert.Equal(HttpStatusCode.NotFound, (await http.GetAsync(new Uri("/not-a-probe", UriKind.Relative))).StatusCode);

        // Act and assert: every probed service is SERVING; a name the server does not know is NotFound, so the check can fail.
        foreach (var (where, service) in findings.ProbeServices.Where(p => !p.Service.StartsWith('/')).DistinctBy(p => p.Service))
        {
            var reply = await health.CheckAsync(new HealthCheckRequest { Service = service });
            Assert.True(reply.Status == HealthCheckResponse.Types.ServingStatus.Serving, $"{where}: health service '{service}' answers {reply.Status}");
        }

        var unknown = await Assert.ThrowsAsync<RpcException>(async () => await health.CheckAsync(new HealthCheckRequest { Service = "not-a-fiber-service" }));
        Assert.Equal(StatusCode.NotFound, unknown.StatusCode);
    }

    public static TheoryData<string, string, string, string, string, string> Breakages => new()
    {
        // area, file changed, text, replacement, file the problem must name, what it must say
        { "kubernetes", "deploy/kubernetes/base/worker.yaml", "containerPort: 7401", "containerPort: 7402", "deploy/kubernetes/base/worker.yaml", "containerPort 7402 is not the port fiber listens on (7401" },
        { "kubernetes", "deploy/kubernetes/base/worker.yaml", "containerPort: 9401", "containerPort: 9402", "deploy/kubernetes/base/worker.yaml", "containerPort 9402 is not the port fiber listens on (7401" },
        { "kubernetes", "deploy/kubernetes/base/worker.yaml", "prometheus.io/port: \"9401\"", "prometheus.io/port: \"9402\"", "deploy/kubernetes/base/worker.yaml", "prometheus.io/port 9402 is not the port of --admin-listen" },
        { "kubernetes", "deploy/kubernetes/base/coordinator.yaml", "- 0.0.0.0:9400", "- 0.0.0.0:9410", "deploy/kubernetes/base/coordinator.yaml", "prometheus.io/port 9400 is not the port of --admin-listen" },
        { "kubernetes", "deploy/kubernetes/base/worker.yaml", "- --shard-cache", "- --shard-cach", "deploy/kubernetes/base/worker.yaml", "--shard-cach is not an option of 'fiber serve worker'" },
        { "kubernetes", "deploy/kubernetes/base/coordinator.yaml", "- --threads\n            - \"2\"", "- --threads\n            - \"0\"", "deploy/kubernetes/base/coordinator.yaml", "--threads 0 is outside [1, 4096]" },
        { "kubernetes", "deploy/kubernetes/base/worker.yaml", "- name: POD_IP", "- name: POD_ADDRESS", "deploy/kubernetes/base/worker.yaml", "$(POD_IP) is not defined in the container's env" },
        { "kubernetes", "deploy/kubernetes/base/worker.yaml", "port: 9401\n              path: /healthz", "port: 9400\n              path: /healthz", "deploy/kubernetes/base/worker.yaml", "livenessProbe asks port 9400, but the admin listener (--admin-listen) is 0.0.0.0:9401" },
        { "kubernetes", "deploy/kubernetes/base/worker.yaml", "path: /readyz", "path: /healthz", "deploy/kubernetes/base/worker.yaml", "readinessProbe asks /healthz; the admin listener answers /readyz for readiness" },
        { "kubernetes", "deploy/kubernetes/base/coordinator.yaml", "httpGet:\n              port: 9400\n              path: /readyz", "grpc:\n              port: 7400\n              service: ready", "deploy/kubernetes/base/coordinator.yaml", "readinessProbe is a native gRPC probe, which cannot speak TLS" },
        { "kubernetes", "deploy/kubernetes/base/worker.yaml", "- https://fiber-coordinator:7400", "- http://fiber-coordinator:7400", "deploy/kubernetes/base/worker.yaml", "--coordinator http://fiber-coordinator:7400 is plain http" },
        { "kubernetes", "deploy/kubernetes/base/coordinator.yaml", "- --tokens\n            - /etc/fiber/tokens/tokens.json\n            ", "", "deploy/kubernetes/base/coordinator.yaml", "'fiber serve coordinator' listens on 0.0.0.0:7400 without tokens" },
        { "kubernetes", "deploy/kubernetes/base/worker.yaml", "- --tls-cert\n            - /etc/fiber/tls/tls.crt\n            - --tls-key\n            - /etc/fiber/tls/tls.key\n            ", "", "deploy/kubernetes/base/worker.yaml", "'fiber serve worker' listens on 0.0.0.0:7401 without TLS" },
        { "kubernetes", "deploy/kubernetes/jobs/sweep-microgrid4.yaml", "- --token-file\n            - /etc/fiber/client/client.token\n            ", "", "deploy/kubernetes/jobs/sweep-microgrid4.yaml", "'fiber sweep' calls https://fiber-coordinator:7400/ without a token" },
        { "kubernetes", "deploy/kubernetes/base/worker.yaml", "https://fiber-coordinator:7400", "https://fiber-coordinator:7500", "deploy/kubernetes/base/worker.yaml", "has no port 7500" },
        { "kubernetes", "deploy/kubernetes/base/worker.yaml", "cpu: \"4\"\n              memory: 4Gi\n            limits:\n              cpu: \"4\"", "cpu: \"4\"\n              memory: 4Gi\n            limits:\n              cpu: \"8\"", "deploy/kubernetes/base/worker.yaml", "should equal the cpu limit 8" },
        { "kubernetes", "deploy/kubernetes/base/coordinator.yaml", "mountPath: /var/lib/fiber", "mountPath: /var/lib/other", "deploy/kubernetes/base/coordinator.yaml", "is not on a persistent volume" },
        { "kubernetes", "deploy/kubernetes/base/coordinator.yaml", "terminationGracePeriodSeconds: 30", "terminationGracePeriodSeconds: 10", "deploy/kubernetes/base/coordinator.yaml", "terminationGracePeriodSeconds 10 should exceed" },
        { "kubernetes", "deploy/kubernetes/postgres/coordinator-postgres.patch.yaml", "  value: --store", "  value: --listen", "deploy/kubernetes/postgres/coordinator-postgres.patch.yaml", "test /spec/template/spec/containers/0/args/4 failed" },
        { "kubernetes", "deploy/kubernetes/postgres/coordinator-postgres.patch.yaml", "- name: FIBER_POSTGRES", "- name: FIBER_PG", "deploy/kubernetes/postgres/coordinator-postgres.patch.yaml", "reads FIBER_POSTGRES, which this file does not put in the coordinator's environment" },
        { "kubernetes", "deploy/kubernetes/jobs/sweep-microgrid4.yaml", "- 4x4x4", "- 4x4", "deploy/kubernetes/jobs/sweep-microgrid4.yaml", "--tiles '4x4' has 2 axes; this family has 3 parameters" },
        { "systemd", "deploy/systemd/fiber-worker@.service", "--threads ${FIBER_WORKER_THREADS}", "--threads ${FIBER_WORKER_THREAD}", "deploy/systemd/fiber-worker@.service", "${FIBER_WORKER_THREAD} is not defined in the environment file example" },
        { "systemd", "deploy/systemd/fiber.env.example", "coordinator.example.internal:7400", "coordinator.example.internal:7500", "deploy/systemd/fiber-worker@.service", "calls the coordinator on port 7500, but it listens on 7400" },
        { "systemd", "deploy/systemd/fiber-coordinator.service", "TimeoutStopSec=30", "TimeoutStopSec=10", "deploy/systemd/fiber-coordinator.service", "TimeoutStopSec=10 should exceed" },
        { "systemd", "deploy/systemd/fiber.env.example", "#FIBER_POSTGRES=", "#FIBER_PG=", "deploy/systemd/fiber-coordinator.service", "with the commented-out settings of deploy/systemd/fiber.env.example switched on: " },
        { "systemd", "deploy/systemd/fiber-worker@.service", "--listen ${FIBER_WORKER_BIND}:%i", "--listen ${FIBER_WORKER_BIND}:7402", "deploy/systemd/fiber-worker@.service", "--listen should end in :%i" },
        { "slurm", "deploy/slurm/fiber-cluster.sbatch", "--listen \"0.0.0.0:${FIBER_WORKER_PORT}\"", "--listen \"0.0.0.0:${FIBER_PORT}\"", "deploy/slurm/fiber-cluster.sbatch", "names port 7401, but the worker listens on 7400" },
        { "slurm", "deploy/slurm/fiber-cluster.sbatch", "FIBER_TILES=${FIBER_TILES:-4x4x4}", "FIBER_TILES=${FIBER_TILES:-4x4}", "deploy/slurm/fiber-cluster.sbatch", "--tiles '4x4' has 2 axes" },
        { "slurm", "deploy/slurm/fiber-cluster.sbatch", "fi\nSWEEP_PID=$!", "SWEEP_PID=$!", "deploy/slurm/fiber-cluster.sbatch", "bash -n fails" },
        { "slurm", "deploy/slurm/fiber-cluster.sbatch", "--coordinator \"$COORDINATOR_URL\" \\\n        --threads", "--coordinator \"$COORDINATOR_ADDRESS\" \\\n        --threads", "deploy/slurm/fiber-cluster.sbatch", "$COORDINATOR_ADDRESS is never set in the script" },
        { "slurm", "deploy/slurm/fiber-cluster.sbatch", "srun --overlap --nodes=1 --ntasks=1 --nodelist=\"$COORDINATOR_NODE\" \\\n    \"$FIBER\" serve coordinator", "\"$FIBER\" serve coordinator", "deploy/slurm/fiber-cluster.sbatch", "'fiber serve coordinator' should run as a job step" },
        { "image", "deploy/docker/Dockerfile", "COPY src/FiberWorkers.Solving/FiberWorkers.Solving.csproj src/FiberWorkers.Solving/\n", string.Empty, "deploy/docker/Dockerfile", "does not COPY src/FiberWorkers.Solving/FiberWorkers.Solving.csproj" },
        { "image", "deploy/docker/Dockerfile", "EXPOSE 7400 7401", "EXPOSE 7400", "deploy/kubernetes/base/worker.yaml", "containerPort 7401 is not EXPOSEd" },
        { "image", "deploy/docker/Dockerfile", "USER $APP_UID", "USER root", "deploy/docker/Dockerfile", "non-root USER" },
        { "systemd", "deploy/systemd/fiber-coordinator.service", "    --tokens %d/tokens.json \\\n", "", "deploy/systemd/fiber-coordinator.service", "'fiber serve coordinator' listens on 0.0.0.0:7400 without tokens" },
        { "systemd", "deploy/systemd/fiber.env.example", "FIBER_COORDINATOR_URL=https://", "FIBER_COORDINATOR_URL=http://", "deploy/systemd/fiber-worker@.service", "--coordinator http://coordinator.example.internal:7400 is plain http" },
        { "slurm", "deploy/slurm/fiber-cluster.sbatch", "--advertise \"https://", "--advertise \"http://", "deploy/slurm/fiber-cluster.sbatch", "is plain http; the servers speak https" },
        { "slurm", "deploy/slurm/fiber-cluster.sbatch", "--token-file \"${FIBER_TLS}/client.token\" \\\n        --tiles", "--tiles", "deploy/slurm/fiber-cluster.sbatch", "'fiber sweep' calls https://" },
        { "readmes", "deploy/README.md", "--worker-token-file tls/worker.token\n", "--worker-token-file tls/worker.token --plaintext\n", "deploy/README.md", "--plaintext: a deployed server runs with TLS and tokens" },
        { "readmes", "deploy/README.md", "--tiles 4x4x4", "--tile 4x4x4", "deploy/README.md", "--tile is not an option of 'fiber sweep'" },
        { "readmes", "deploy/README.md", "deploy/kubernetes/postgres", "deploy/kubernetes/postgresql", "deploy/README.md", "deploy/kubernetes/postgresql does not exist" },
        { "coverage", "deploy/helm/values.yaml", string.Empty, "replicas: 3\n", "deploy/helm/values.yaml", "no deploy check reads this kind of file" },
    };

    [Theory]
    [MemberData(nameof(Breakages))]
    public void A_broken_copy_of_deploy_fails_with_file_and_line(string area, string file, string text, string replacement, string reported, string message)
    {
        // Arrange: a copy of deploy/ with one change.
        var root = Directory.CreateTempSubdirectory("fiber-deploy-").FullName;
        try
        {
            var files = DeployFiles.Repository.CopyDeploy(root);
            var path = files.Full(file);
            if (text.Length == 0)
            {
                Directory.CreateDirectory(Path.GetDirectoryName(path)!);
                File.WriteAllText(path, replacement);
            }
            else
            {
                var content = File.ReadAllText(path);
                Assert.True(content.Contains(text, StringComparison.Ordinal), $"{file} no longer contains the text this case breaks: {text}");
                var at = content.IndexOf(text, StringComparison.Ordinal);
                File.WriteAllText(path, content[..at] + replacement + content[(at + text.Length)..]);
            }

            // Act
            var problems = area switch
            {
                "kubernetes" => DeployChecks.Kubernetes(files),
                "slurm" => DeployChecks.Slurm(files),
                "systemd" => DeployChecks.Systemd(files),
                "image" => DeployChecks.Image(files),
                "readmes" => DeployChecks.Readmes(files),
                _ => DeployChecks.Coverage(files),
            };

            // Assert: the problem names the file and a line, and says what is wrong.
            var located = new Regex($"^{Regex.Escape(reported)}:[1-9][0-9]*: ");
            Assert.True(
                problems.Any(p => located.IsMatch(p) && p.Contains(message, StringComparison.Ordinal)),
                $"expected a problem '{reported}:LINE: ...{message}...'; got:\n{string.Join('\n', problems)}");
        }
        finally
        {
            Directory.Delete(root, recursive: true);
        }
    }

    private static void AssertNone(List<string> problems)
    {
        if (problems.Count > 0)
        {
            Assert.Fail($"{problems.Count} problem(s) in deploy/ (fix the file, or the CLI option it uses):\n{string.Join('\n', problems)}");
        }
    }
}

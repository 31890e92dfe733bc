namespace FiberWorkers.Cli.Tests.Deploy;

/// <summary>
/// The security rules of a deployment, on top of what fiber itself refuses: every server outside loopback listens
/// with TLS and checks tokens (no <c>--plaintext</c>, no <c>--insecure-no-auth</c>), calls the other servers over
/// https trusting a given CA and with a worker-role token, and every client calls https with a CA and a token. A
/// token may come from its environment variable instead of the option.
/// </summary>
internal sealed partial class FiberCommandCheck
{
    private static void CheckServerSecurity(FiberInvocation invocation, IReadOnlySet<string> environment, List<string> problems)
    {
        var where = invocation.WhereOf("--listen");
        var name = $"'fiber {invocation.Command}' listens on {invocation["--listen"] ?? "loopback"}";
        if (invocation.Listen is { IsLoopback: true })
        {
            return;
        }

        foreach (var forbidden in new[] { "--plaintext", "--insecure-no-auth" })
        {
            if (invocation[forbidden] is "true")
            {
                problems.Add($"{invocation.WhereOf(forbidden)}: {forbidden}: a deployed server runs with TLS and tokens");
            }
        }

        if (invocation["--tls-cert"] is null || invocation["--tls-key"] is null)
        {
            problems.Add($"{where}: {name} without TLS: give --tls-cert and --tls-key");
        }

        if (invocation["--tokens"] is null && !environment.Contains("FIBER_TOKENS_FILE") && !environment.Contains("FIBER_TOKENS"))
        {
            problems.Add($"{where}: {name} without tokens: give --tokens FILE (or FIBER_TOKENS_FILE in its environment)");
        }

        var (tokenOption, tokenVariable, peer) = invocation.Command == "serve coordinator"
            ? ("--worker-token-file", "FIBER_WORKER_TOKEN", "its workers")
            : ("--token-file", "FIBER_TOKEN", "its coordinator");
        if (invocation[tokenOption] is null && !environment.Contains(tokenVariable))
        {
            problems.Add($"{where}: {name} and calls {peer} without a worker-role token: give {tokenOption} FILE (or {tokenVariable} in its environment)");
        }

        if (invocation["--tls-ca"] is null)
        {
            problems.Add($"{where}: {name} and calls {peer} over https without --tls-ca (the CA their certificates chain to)");
        }

        if (invocation["--tls-client-ca"] is not null && (invocation["--tls-client-cert"] is null || invocation["--tls-client-key"] is null))
        {
            problems.Add($"{invocation.WhereOf("--tls-client-ca")}: {name} requires client certificates (--tls-client-ca) but presents none to {peer}: give --tls-client-cert and --tls-client-key");
        }

        foreach (var option in new[] { "--coordinator", "--advertise" })
        {
            if (invocation.Url(option) is { Scheme: "http" } url)
            {
                problems.Add($"{invocation.WhereOf(option)}: {option} {url.GetLeftPart(UriPartial.Authority)} is plain http; the servers speak https");
            }
        }
    }

    private static void CheckClientSecurity(FiberInvocation invocation, IReadOnlySet<string> environment, List<string> problems)
    {
        if (invocation.Url("--coordinator") is not { } coordinator)
        {
            return;
        }

        var where = invocation.WhereOf("--coordinator");
        if (coordinator.Scheme != Uri.UriSchemeHttps)
        {
            problems.Add($"{where}: --coordinator {coordinator.GetLeftPart(UriPartial.Authority)} is plain http; the servers speak https");
        }

        if (invocation["--token-file"] is null && !environment.Contains("FIBER_TOKEN"))
        {
            problems.Add($"{where}: 'fiber {invocation.Command}' calls {coordinator} without a token: give --token-file FILE (or FIBER_TOKEN in its environment)");
        }

        if (invocation["--tls-ca"] is null)
        {
            problems.Add($"{where}: 'fiber {invocation.Command}' calls {coordinator} without --tls-ca (the CA the coordinator's certificate chains to)");
        }
    }
}

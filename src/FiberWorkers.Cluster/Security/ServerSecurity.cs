using FiberWorkers.Cluster.Hosting;

namespace FiberWorkers.Cluster.Security;

/// <summary>
/// A server's security: TLS on its listener, the tokens it accepts, and how it calls the other servers (a worker its
/// coordinator, the coordinator its workers). The default is none of it, which <see cref="Problem"/> accepts on
/// loopback only: outside loopback a server needs TLS, and tokens unless <see cref="InsecureNoAuth"/> says otherwise.
/// </summary>
public sealed record ServerSecurity
{
    /// <summary>Plaintext, no tokens, plain outgoing channels (loopback only).</summary>
    public static ServerSecurity None { get; } = new();

    /// <summary>TLS of the listener; null: plaintext.</summary>
    public ServerTls? Tls { get; init; }

    /// <summary>The tokens every call must carry (health checks excepted); null: calls need no token.</summary>
    public TokenTable? Tokens { get; init; }

    /// <summary>Serve without tokens on a listener outside loopback (TLS still required): every caller that can connect may call everything.</summary>
    public bool InsecureNoAuth { get; init; }

    /// <summary>The channels this server opens to the other servers.</summary>
    public ClientSecurity Outbound { get; init; } = ClientSecurity.None;

    /// <summary>Why this set-up may not listen on <paramref name="listen"/>, or null when it may.</summary>
    public string? Problem(ListenAddress listen)
    {
        ArgumentNullException.ThrowIfNull(listen);
        if (listen.IsLoopback)
        {
            return null;
        }

        if (Tls is null)
        {
            return $"{listen} is not a loopback address: a server listening there needs TLS (a certificate and its key)";
        }

        return Tokens is null && !InsecureNoAuth
            ? $"{listen} is not a loopback address: a server listening there needs a token file (or an explicit opt-out of authentication)"
            : null;
    }

    /// <summary>What is on, for the start-up log line (never token values).</summary>
    public string Describe() =>
        $"{(Tls is null ? "plaintext" : Tls.ToString())}; {(Tokens is null ? (InsecureNoAuth ? "NO AUTHENTICATION (--insecure-no-auth)" : "no tokens") : $"{Tokens.Names.Count} tokens")}; outgoing calls: {Outbound}";
}

using System.CommandLine;
using FiberWorkers.Cluster.Hosting;
using FiberWorkers.Cluster.Security;

namespace FiberWorkers.Cli.Commands;

/// <summary>
/// The security options of <c>fiber serve coordinator|worker</c>: TLS of the listener (<c>--tls-cert</c>,
/// <c>--tls-key</c>, <c>--tls-client-ca</c> for mutual TLS, or <c>--plaintext</c> on loopback only), the tokens calls
/// need (<c>--tokens</c>, or FIBER_TOKENS_FILE / FIBER_TOKENS; <c>--insecure-no-auth</c> to go without outside
/// loopback), and the client side of the channels the server opens (<see cref="ClientSecurityArguments"/>).
/// </summary>
internal sealed class ServerSecurityArguments
{
    /// <summary>Names the token file (its path).</summary>
    public const string TokensFileVariable = "FIBER_TOKENS_FILE";

    /// <summary>Holds the token file's JSON text itself.</summary>
    public const string TokensVariable = "FIBER_TOKENS";

    private readonly Option<string?> _certificate = new("--tls-cert") { Description = "The server's TLS certificate (PEM; intermediates may follow it)." };
    private readonly Option<string?> _key = new("--tls-key") { Description = "The private key of --tls-cert (PEM)." };
    private readonly Option<string?> _clientCa = new("--tls-client-ca") { Description = "Require client certificates signed by this CA (PEM; mutual TLS)." };
    private readonly Option<bool> _plaintext = new("--plaintext") { Description = "Serve without TLS (loopback --listen only)." };
    private readonly Option<string?> _tokens = new("--tokens") { Description = $"The token file (JSON: names, SHA-256 of tokens, roles, tenants); default ${TokensFileVariable} or ${TokensVariable}." };
    private readonly Option<bool> _noAuth = new("--insecure-no-auth") { Description = "Outside loopback, serve without tokens: anyone who can connect may call everything." };

    public ServerSecurityArguments(ClientSecurityArguments outbound)
    {
        Outbound = outbound;
    }

    /// <summary>The channels the server opens (worker → coordinator, coordinator → workers).</summary>
    public ClientSecurityArguments Outbound { get; }

    public IEnumerable<Option> Options => [_certificate, _key, _clientCa, _plaintext, _tokens, _noAuth, .. Outbound.Options];

    /// <summary>Adds every option to a serve command.</summary>
    public void AddTo(Command command)
    {
        foreach (var option in Options)
        {
            command.Options.Add(option);
        }
    }

    /// <summary>As <see cref="Resolve"/>, and checks the worker's <c>--coordinator</c> and <c>--advertise</c> URLs against it.</summary>
    public ServerSecurity ResolveWorker(ParseResult parse, ListenAddress listen, Uri coordinator, Uri? advertise)
    {
        var security = Resolve(parse, listen);
        if (ChannelSecurity.Problem(coordinator, security.Outbound) is { } problem)
        {
            throw new UsageException($"--coordinator {problem}");
        }

        if (advertise is not null && (advertise.Scheme == Uri.UriSchemeHttps) != (security.Tls is not null))
        {
            throw new UsageException(security.Tls is null
                ? $"--advertise {advertise} is https:// but the worker listens without TLS"
                : $"--advertise {advertise}: the worker listens with TLS, so others reach it at https://");
        }

        return security;
    }

    /// <summary>Checks the combination against the listen address and reads the files (errors name the option or the file).</summary>
    public ServerSecurity Resolve(ParseResult parse, ListenAddress listen)
    {
        var certificate = parse.GetValue(_certificate);
        var key = parse.GetValue(_key);
        var clientCa = parse.GetValue(_clientCa);
        var plaintext = parse.GetValue(_plaintext);
        if (certificate is null != (key is null))
        {
            throw new UsageException(certificate is null ? "--tls-key needs --tls-cert" : "--tls-cert needs --tls-key (the certificate's private key)");
        }

        if (plaintext && certificate is not null)
        {
            throw new UsageException("give either --plaintext or --tls-cert and --tls-key, not both");
        }

        if (clientCa is not null && certificate is null)
        {
            throw new UsageException("--tls-client-ca (mutual TLS) needs --tls-cert and --tls-key");
        }

        if (certificate is null && !plaintext)
        {
            throw new UsageException(listen.IsLoopback
                ? $"--listen {listen}: give --tls-cert and --tls-key, or --plaintext to serve without TLS on loopback"
                : $"--listen {listen} is not a loopback address: give --tls-cert and --tls-key (TLS is required outside loopback)");
        }

        if (plaintext && !listen.IsLoopback)
        {
            throw new UsageException($"--plaintext is allowed only with a loopback --listen (127.0.0.1, ::1), not {listen}: give --tls-cert and --tls-key");
        }

        var noAuth = parse.GetValue(_noAuth);
        var tokens = Tokens(parse.GetValue(_tokens));
        if (noAuth && tokens is not null)
        {
            throw new UsageException("give a token file or --insecure-no-auth, not both");
        }

        if (tokens is null && !noAuth && !listen.IsLoopback)
        {
            throw new UsageException(
                $"--listen {listen} is not a loopback address: give --tokens FILE (or ${TokensFileVariable} / ${TokensVariable}), or --insecure-no-auth to let anyone who can connect call everything");
        }

        return new ServerSecurity
        {
            Tls = certificate is null ? null : ServerTls.Load(certificate, key!, clientCa),
            Tokens = tokens,
            InsecureNoAuth = noAuth,
            Outbound = Outbound.Resolve(parse),
        };
    }

    private static TokenTable? Tokens(string? file)
    {
        if (file is not null)
        {
            return TokenTable.Load(file);
        }

        if (Environment.GetEnvironmentVariable(TokensFileVariable) is { Length: > 0 } path)
        {
            return TokenTable.Load(path);
        }

        return Environment.GetEnvironmentVariable(TokensVariable) is { Length: > 0 } text ? TokenTable.Parse(text, $"${TokensVariable}") : null;
    }
}

/// <summary>
/// The client side of TLS and tokens, for commands that call a coordinator (<c>sweep</c>, <c>ask</c>, <c>atlas</c>,
/// <c>bench ask</c> with <c>--coordinator</c>) and for the channels servers open: <c>--tls-ca</c> (the roots https
/// servers must chain to; default the system's), <c>--tls-client-cert</c>/<c>--tls-client-key</c> (mutual TLS) and a
/// token file (or its environment variable).
/// </summary>
internal sealed class ClientSecurityArguments
{
    private readonly Option<string?> _ca = new("--tls-ca") { Description = "Trust https servers whose certificates chain to this CA bundle (PEM) instead of the system's roots." };
    private readonly Option<string?> _certificate = new("--tls-client-cert") { Description = "Present this client certificate (PEM) to servers that require one (mutual TLS)." };
    private readonly Option<string?> _key = new("--tls-client-key") { Description = "The private key of --tls-client-cert (PEM)." };
    private readonly Option<string?> _serverName = new("--tls-server-name") { Description = "The name server certificates must carry instead of the host of the URL (e.g. workers called at pod IPs)." };
    private readonly Option<string?> _token;
    private readonly string _tokenOption;
    private readonly string _tokenVariable;

    /// <param name="tokenOption">The option naming the token file (<c>--token-file</c>; the coordinator's is <c>--worker-token-file</c>).</param>
    /// <param name="tokenVariable">The environment variable holding the token when the option is absent.</param>
    /// <param name="what">What the token is for, for the option's help.</param>
    public ClientSecurityArguments(string tokenOption = "--token-file", string tokenVariable = "FIBER_TOKEN", string what = "sent as the bearer token of every call")
    {
        _tokenOption = tokenOption;
        _tokenVariable = tokenVariable;
        _token = new Option<string?>(tokenOption) { Description = $"A file holding the token {what}; default ${tokenVariable}." };
    }

    public IEnumerable<Option> Options => [_ca, _certificate, _key, _serverName, _token];

    /// <summary>Reads the files; errors name the option or the file.</summary>
    public ClientSecurity Resolve(ParseResult parse)
    {
        var certificate = parse.GetValue(_certificate);
        var key = parse.GetValue(_key);
        if (certificate is null != (key is null))
        {
            throw new UsageException(certificate is null ? "--tls-client-key needs --tls-client-cert" : "--tls-client-cert needs --tls-client-key (the certificate's private key)");
        }

        var serverName = parse.GetValue(_serverName);
        if (serverName is not null && Uri.CheckHostName(serverName) is not (UriHostNameType.Dns or UriHostNameType.IPv4 or UriHostNameType.IPv6))
        {
            throw new UsageException($"--tls-server-name '{serverName}' is not a host name");
        }

        var security = ClientSecurity.Load(parse.GetValue(_ca), certificate, key, parse.GetValue(_token), serverName);
        if (!security.HasToken && Environment.GetEnvironmentVariable(_tokenVariable) is { Length: > 0 } text)
        {
            var token = text.Trim();
            security = TokenTable.TokenProblem(token) is { } problem
                ? throw new UsageException($"${_tokenVariable}: the token {problem}")
                : security.WithToken(token);
        }

        return security;
    }

    /// <summary>Resolves and checks that <paramref name="address"/> (given by <paramref name="option"/>) can be reached with it.</summary>
    public ClientSecurity Resolve(ParseResult parse, Uri address, string option)
    {
        var security = Resolve(parse);
        return ChannelSecurity.Problem(address, security) is { } problem
            ? throw new UsageException($"{option} {problem}; or leave out {_tokenOption} and ${_tokenVariable}")
            : security;
    }
}

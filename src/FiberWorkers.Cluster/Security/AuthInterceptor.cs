using Grpc.Core;
using Grpc.Core.Interceptors;
using Serilog;

namespace FiberWorkers.Cluster.Security;

/// <summary>
/// Checks the bearer token of every call (<c>authorization: Bearer TOKEN</c>) against the server's
/// <see cref="TokenTable"/> and the RPC's roles (<see cref="Roles.ByMethod"/>), and stores the <see cref="Caller"/>
/// in the call's user state. A missing or unknown token is Unauthenticated and a known one without the role
/// PermissionDenied, both with fixed messages: nothing tells a caller whether a token exists. Logs name tokens,
/// never their values.
/// </summary>
public sealed class AuthInterceptor : Interceptor
{
    private const string Scheme = "Bearer ";
    private static readonly TimeSpan LogInterval = TimeSpan.FromSeconds(10);
    private readonly TokenTable _tokens;
    private readonly ILogger _log;
    private long _nextAnonymousLog;
    private long _anonymousRefused;

    public AuthInterceptor(TokenTable tokens, ILogger log)
    {
        ArgumentNullException.ThrowIfNull(tokens);
        ArgumentNullException.ThrowIfNull(log);
        _tokens = tokens;
        _log = log;
    }

    /// <summary>The message of an Unauthenticated refusal.</summary>
    public const string Unauthenticated = "a valid bearer token is required";

    public override Task<TResponse> UnaryServerHandler<TRequest, TResponse>(TRequest request, ServerCallContext context, UnaryServerMethod<TRequest, TResponse> continuation)
    {
        Authorize(context);
        return continuation(request, context);
    }

    public override Task ServerStreamingServerHandler<TRequest, TResponse>(TRequest request, IServerStreamWriter<TResponse> responseStream, ServerCallContext context, ServerStreamingServerMethod<TRequest, TResponse> continuation)
    {
        Authorize(context);
        return continuation(request, responseStream, context);
    }

    public override Task<TResponse> ClientStreamingServerHandler<TRequest, TResponse>(IAsyncStreamReader<TRequest> requestStream, ServerCallContext context, ClientStreamingServerMethod<TRequest, TResponse> continuation)
    {
        Authorize(context);
        return continuation(requestStream, context);
    }

    public override Task DuplexStreamingServerHandler<TRequest, TResponse>(IAsyncStreamReader<TRequest> requestStream, IServerStreamWriter<TResponse> responseStream, ServerCallContext context, DuplexStreamingServerMethod<TRequest, TResponse> continuation)
    {
        Authorize(context);
        return continuation(requestStream, responseStream, context);
    }

    /// <summary>Passes the call or throws the refusal.</summary>
    internal void Authorize(ServerCallContext context)
    {
        var method = context.Method;
        if (Roles.OpenServices.Any(s => method.StartsWith(s, StringComparison.Ordinal)))
        {
            return;
        }

        var caller = Authenticate(context.RequestHeaders.GetValue("authorization"));
        if (caller is null)
        {
            RefusedAnonymous(method, context.Peer);
            throw new RpcException(new Status(StatusCode.Unauthenticated, Unauthenticated));
        }

        var allowed = Roles.AnyTokenServices.Any(s => method.StartsWith(s, StringComparison.Ordinal))
            || (Roles.ByMethod.TryGetValue(method, out var roles) && roles.Any(caller.Roles.Contains));
        if (!allowed)
        {
            _log.Warning("refused {Rpc} to token {TokenName}: it lacks the role", Roles.ShortName(method), caller.Name);
            throw new RpcException(new Status(StatusCode.PermissionDenied, $"this token may not call {Roles.ShortName(method)}"));
        }

        context.UserState[Caller.UserStateKey] = caller;
    }

    private Caller? Authenticate(string? header)
    {
        if (header is null || !header.StartsWith(Scheme, StringComparison.OrdinalIgnoreCase))
        {
            return null;
        }

        var token = header[Scheme.Length..].Trim();
        return token.Length == 0 ? null : _tokens.Authenticate(token);
    }

    // Calls without a valid token can come in floods: one line per interval, with the count.
    private void RefusedAnonymous(string method, string? peer)
    {
        var refused = Interlocked.Increment(ref _anonymousRefused);
        var now = Environment.TickCount64;
        var next = Interlocked.Read(ref _nextAnonymousLog);
        if (now >= next && Interlocked.CompareExchange(ref _nextAnonymousLog, now + (long)LogInterval.TotalMilliseconds, next) == next)
        {
            _log.Warning("refused {Rpc} from {Peer}: no valid bearer token ({Refused} such refusals so far)", Roles.ShortName(method), peer, refused);
        }
    }
}

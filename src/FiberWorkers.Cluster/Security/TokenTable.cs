using System.Security.Cryptography;
using System.Text;
using System.Text.Json;
using FiberWorkers.Algebra.Families;

namespace FiberWorkers.Cluster.Security;

/// <summary>
/// The bearer tokens a server accepts, read from a token file: each with a name (what logs show), its roles and an
/// optional tenant. Only SHA-256 digests are kept in memory; a presented token is hashed and compared with every
/// entry in constant time, so neither timing nor an early exit tells which entry came close.
/// </summary>
/// <remarks>
/// The file is JSON: <c>{"tokens": [{"name": "alice", "sha256": "64 hex digits", "roles": ["submit", "query"],
/// "tenant": "acme"}, {"name": "workers", "token": "the token itself", "roles": ["worker"]}]}</c>. Give either
/// <c>sha256</c> (the digest of the token's UTF-8 bytes, as <c>printf %s TOKEN | sha256sum</c> prints it) or
/// <c>token</c>; the digest form keeps the file harmless to read.
/// </remarks>
public sealed class TokenTable
{
    /// <summary>Shortest token accepted in the <c>token</c> form (characters).</summary>
    public const int MinTokenLength = 16;

    private readonly Entry[] _entries;

    private TokenTable(Entry[] entries) => _entries = entries;

    /// <summary>The token names, in file order.</summary>
    public IReadOnlyList<string> Names => [.. _entries.Select(e => e.Caller.Name)];

    /// <summary>The entries (name, tenant, roles), in file order.</summary>
    public IReadOnlyList<Caller> Callers => [.. _entries.Select(e => e.Caller)];

    /// <summary>Reads a token file; an <see cref="InputException"/> names the file and the entry when it is wrong.</summary>
    public static TokenTable Load(string path)
    {
        ArgumentNullException.ThrowIfNull(path);
        string text;
        try
        {
            text = File.ReadAllText(path);
        }
        catch (Exception e) when (e is IOException or UnauthorizedAccessException)
        {
            throw new InputException(path, string.Empty, $"cannot read the token file: {e.Message}");
        }

        return Parse(text, path);
    }

    /// <summary>Parses the JSON text of a token file; <paramref name="source"/> names it in errors.</summary>
    public static TokenTable Parse(string text, string source)
    {
        ArgumentNullException.ThrowIfNull(text);
        ArgumentNullException.ThrowIfNull(source);
        JsonDocument document;
        try
        {
            document = JsonDocument.Parse(text, new JsonDocumentOptions { CommentHandling = JsonCommentHandling.Skip, AllowTrailingCommas = true });
        }
        catch (JsonException e)
        {
            // The parser's message quotes no values, only the position.
            throw new InputException(source, e.LineNumber is { } line ? $"line {line + 1}" : string.Empty, "not valid JSON: " + e.Message.Split(" Path:")[0]);
        }

        using (document)
        {
            var problems = new List<InputProblem>();
            var root = document.RootElement;
            if (root.ValueKind != JsonValueKind.Object || !root.TryGetProperty("tokens", out var tokens) || tokens.ValueKind != JsonValueKind.Array)
            {
                throw new InputException(source, string.Empty, "expected an object {\"tokens\": [...]}");
            }

            foreach (var property in root.EnumerateObject().Where(p => p.Name != "tokens"))
            {
                problems.Add(new InputProblem(source, property.Name, "unknown field (the file holds only \"tokens\")"));
            }

            var entries = new List<Entry>();
            var index = 0;
            foreach (var element in tokens.EnumerateArray())
            {
                var entry = ReadEntry(element, source, $"tokens[{index}]", problems);
                if (entry is not null)
                {
                    if (entries.Any(e => e.Caller.Name == entry.Caller.Name))
                    {
                        problems.Add(new InputProblem(source, $"tokens[{index}].name", $"'{entry.Caller.Name}' is used by an earlier entry; names must be unique"));
                    }
                    else if (entries.Any(e => CryptographicOperations.FixedTimeEquals(e.Digest, entry.Digest)))
                    {
                        problems.Add(new InputProblem(source, $"tokens[{index}]", $"'{entry.Caller.Name}' has the same token as an earlier entry"));
                    }
                    else
                    {
                        entries.Add(entry);
                    }
                }

                index++;
            }

            if (index == 0)
            {
                problems.Add(new InputProblem(source, "tokens", "is empty: give at least one token"));
            }

            return problems.Count > 0 ? throw new InputException(problems) : new TokenTable([.. entries]);
        }
    }

    /// <summary>The caller a presented token belongs to, or null. Takes the same time whichever entry (if any) matches.</summary>
    public Caller? Authenticate(string presented)
    {
        ArgumentNullException.ThrowIfNull(presented);
        Span<byte> digest = stackalloc byte[SHA256.HashSizeInBytes];
        SHA256.HashData(Encoding.UTF8.GetBytes(presented), digest);
        Caller? found = null;
        foreach (var entry in _entries)
        {
            // No break: every entry is compared.
            if (CryptographicOperations.FixedTimeEquals(digest, entry.Digest))
            {
                found = entry.Caller;
            }
        }

        return found;
    }

    /// <summary>The hex SHA-256 of a token, as the <c>sha256</c> field holds it.</summary>
    public static string Digest(string token)
    {
        ArgumentNullException.ThrowIfNull(token);
        return Convert.ToHexStringLower(SHA256.HashData(Encoding.UTF8.GetBytes(token)));
    }

    /// <summary>Checks a token's text (from a token file of a client): printable ASCII without spaces, at least <see cref="MinTokenLength"/> characters.</summary>
    public static string? TokenProblem(string token) =>
        token.Length < MinTokenLength ? $"is {token.Length} characters long; tokens have at least {MinTokenLength}"
        : token.Any(c => c is <= ' ' or > '~') ? "may hold only printable ASCII characters without spaces"
        : null;

    private static Entry? ReadEntry(JsonElement element, string source, string where, List<InputProblem> problems)
    {
        if (element.ValueKind != JsonValueKind.Object)
        {
            problems.Add(new InputProblem(source, where, "expected an object with name, roles and token or sha256"));
            return null;
        }

        var before = problems.Count;
        string? name = null, token = null, sha256 = null, tenant = null;
        var roles = new SortedSet<string>(StringComparer.Ordinal);
        foreach (var property in element.EnumerateObject())
        {
            var at = $"{where}.{property.Name}";
            switch (property.Name)
            {
                case "name":
                    name = Text(property.Value, source, at, problems);
                    if (name is not null && !IsName(name))
                    {
                        problems.Add(new InputProblem(source, at, $"'{name}' is not a name: use 1 to 64 letters, digits, '-', '_' or '.'"));
                    }

                    break;
                case "token":
                    // Never quote the token itself.
                    token = Text(property.Value, source, at, problems);
                    if (token is not null && TokenProblem(token) is { } problem)
                    {
                        problems.Add(new InputProblem(source, at, $"the token {problem}"));
                    }

                    break;
                case "sha256":
                    sha256 = Text(property.Value, source, at, problems);
                    if (sha256 is not null && (sha256.Length != 64 || !sha256.All(char.IsAsciiHexDigit)))
                    {
                        problems.Add(new InputProblem(source, at, "must be 64 hexadecimal digits (printf %s TOKEN | sha256sum)"));
                    }

                    break;
                case "tenant":
                    if (property.Value.ValueKind == JsonValueKind.Null)
                    {
                        break;
                    }

                    tenant = Text(property.Value, source, at, problems);
                    if (tenant is not null && !TenantScope.IsTenant(tenant))
                    {
                        problems.Add(new InputProblem(source, at, $"'{tenant}' is not a tenant name: use 1 to 64 letters, digits, '-', '_' or '.'"));
                    }

                    break;
                case "roles":
                    if (property.Value.ValueKind != JsonValueKind.Array)
                    {
                        problems.Add(new InputProblem(source, at, "expected an array of roles, e.g. [\"submit\", \"query\"]"));
                        break;
                    }

                    var k = 0;
                    foreach (var role in property.Value.EnumerateArray())
                    {
                        var text = Text(role, source, $"{at}[{k}]", problems);
                        if (text is not null && !Roles.All.Contains(text))
                        {
                            problems.Add(new InputProblem(source, $"{at}[{k}]", $"unknown role '{text}' (roles: {string.Join(", ", Roles.All)})"));
                        }
                        else if (text is not null)
                        {
                            roles.Add(text);
                        }

                        k++;
                    }

                    break;
                default:
                    problems.Add(new InputProblem(source, at, "unknown field (fields: name, token, sha256, roles, tenant)"));
                    break;
            }
        }

        if (name is null && problems.Count == before)
        {
            problems.Add(new InputProblem(source, where, "has no name"));
        }

        if (token is null == (sha256 is null) && problems.Count == before)
        {
            problems.Add(new InputProblem(source, where, $"'{name}': give exactly one of token and sha256"));
        }

        if (roles.Count == 0 && problems.Count == before)
        {
            problems.Add(new InputProblem(source, $"{where}.roles", $"'{name}' has no roles (roles: {string.Join(", ", Roles.All)})"));
        }

        if (tenant is not null && roles.Contains(Roles.Worker))
        {
            problems.Add(new InputProblem(source, $"{where}.tenant", $"'{name}' has the worker role, which serves every tenant: give worker tokens no tenant"));
        }

        if (problems.Count > before)
        {
            return null;
        }

        var digest = token is not null ? SHA256.HashData(Encoding.UTF8.GetBytes(token)) : Convert.FromHexString(sha256!);
        return new Entry(new Caller(name!, tenant, roles), digest);
    }

    private static string? Text(JsonElement value, string source, string where, List<InputProblem> problems)
    {
        if (value.ValueKind == JsonValueKind.String)
        {
            return value.GetString();
        }

        problems.Add(new InputProblem(source, where, $"expected a string, got {value.ValueKind.ToString().ToLowerInvariant()}"));
        return null;
    }

    internal static bool IsName(string text) =>
        text.Length is >= 1 and <= 64 && text.All(c => char.IsAsciiLetterOrDigit(c) || c is '-' or '_' or '.');

    private sealed record Entry(Caller Caller, byte[] Digest);
}

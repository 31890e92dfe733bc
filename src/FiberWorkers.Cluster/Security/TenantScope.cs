namespace FiberWorkers.Cluster.Security;

/// <summary>
/// Atlases of a tenant: a caller whose token has a tenant works in its own namespace. The coordinator stores that
/// tenant's atlases under <c>TENANT/ATLAS_ID</c> and the caller sees them as <c>ATLAS_ID</c>; it cannot name, list
/// or watch anything outside its namespace. Callers without a tenant (and servers without tokens) see store ids as
/// they are, every tenant's included.
/// </summary>
public static class TenantScope
{
    /// <summary>Between the tenant and the atlas id in store ids. Tenant names cannot contain it.</summary>
    public const char Separator = '/';

    /// <summary>1 to 64 letters, digits, '-', '_' or '.'.</summary>
    public static bool IsTenant(string text) => TokenTable.IsName(text);

    /// <summary>The store's id of the atlas a caller names (empty stays empty: "every atlas").</summary>
    public static string Inside(Caller? caller, string atlasId)
    {
        ArgumentNullException.ThrowIfNull(atlasId);
        return caller?.Tenant is { } tenant && atlasId.Length > 0 ? $"{tenant}{Separator}{atlasId}" : atlasId;
    }

    /// <summary>The id a caller knows a store id by (the inverse of <see cref="Inside"/> for ids the caller <see cref="Sees"/>).</summary>
    public static string Outside(Caller? caller, string storeId)
    {
        ArgumentNullException.ThrowIfNull(storeId);
        return caller?.Tenant is { } tenant && storeId.StartsWith(tenant + Separator, StringComparison.Ordinal) ? storeId[(tenant.Length + 1)..] : storeId;
    }

    /// <summary>Whether a store id lies in the caller's namespace.</summary>
    public static bool Sees(Caller? caller, string storeId)
    {
        ArgumentNullException.ThrowIfNull(storeId);
        return caller?.Tenant is not { } tenant || storeId.StartsWith(tenant + Separator, StringComparison.Ordinal);
    }

    /// <summary>The namespace of a store id ("acme/"), or null for an atlas of no tenant.</summary>
    public static string? NamespaceOf(string storeId)
    {
        ArgumentNullException.ThrowIfNull(storeId);
        var slash = storeId.LastIndexOf(Separator);
        return slash > 0 ? storeId[..(slash + 1)] : null;
    }

    /// <summary>The namespace a tenant's sweeps write under ("acme/"), or null without a tenant.</summary>
    public static string? NamespaceOf(Caller? caller) => caller?.Tenant is { } tenant ? tenant + Separator : null;
}

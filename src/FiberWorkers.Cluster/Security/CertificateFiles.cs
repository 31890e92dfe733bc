using System.Security.Cryptography;
using System.Security.Cryptography.X509Certificates;
using FiberWorkers.Algebra.Families;

namespace FiberWorkers.Cluster.Security;

/// <summary>
/// PEM certificates, keys and CA bundles read from files, and chain checks against a custom set of roots (never the
/// system store). Problems are <see cref="InputException"/>s naming the file.
/// </summary>
public static class CertificateFiles
{
    /// <summary>TLS web server authentication (1.3.6.1.5.5.7.3.1).</summary>
    public static Oid ServerAuthentication { get; } = new("1.3.6.1.5.5.7.3.1");

    /// <summary>TLS web client authentication (1.3.6.1.5.5.7.3.2).</summary>
    public static Oid ClientAuthentication { get; } = new("1.3.6.1.5.5.7.3.2");

    /// <summary>A certificate with its private key (the first certificate of <paramref name="certificateFile"/>) and the other certificates of the file (intermediates).</summary>
    public static (X509Certificate2 Certificate, X509Certificate2Collection Chain) LoadWithKey(string certificateFile, string keyFile)
    {
        ArgumentNullException.ThrowIfNull(certificateFile);
        ArgumentNullException.ThrowIfNull(keyFile);
        Readable(certificateFile);
        Readable(keyFile);
        X509Certificate2 certificate;
        try
        {
            using var loaded = X509Certificate2.CreateFromPemFile(certificateFile, keyFile);

            // Keys loaded from PEM are ephemeral; a PKCS#12 round trip gives one TLS stacks accept everywhere.
            certificate = X509CertificateLoader.LoadPkcs12(loaded.Export(X509ContentType.Pkcs12), null);
        }
        catch (CryptographicException e)
        {
            throw new InputException(certificateFile, string.Empty, $"cannot load the certificate with the key in {keyFile}: {e.Message} (both PEM; the key must match the certificate)");
        }

        var all = LoadBundle(certificateFile);
        var chain = new X509Certificate2Collection();
        foreach (var other in all.Skip(1))
        {
            chain.Add(other);
        }

        if (!certificate.HasPrivateKey)
        {
            throw new InputException(keyFile, string.Empty, "holds no private key for the certificate");
        }

        return (certificate, chain);
    }

    /// <summary>Every certificate of a PEM bundle (a CA file); at least one.</summary>
    public static X509Certificate2Collection LoadBundle(string file)
    {
        ArgumentNullException.ThrowIfNull(file);
        Readable(file);
        var bundle = new X509Certificate2Collection();
        try
        {
            bundle.ImportFromPemFile(file);
        }
        catch (CryptographicException e)
        {
            throw new InputException(file, string.Empty, $"not a PEM certificate file: {e.Message}");
        }

        return bundle.Count > 0 ? bundle : throw new InputException(file, string.Empty, "holds no certificate (expected PEM blocks 'BEGIN CERTIFICATE')");
    }

    /// <summary>
    /// Whether <paramref name="certificate"/> chains to one of <paramref name="roots"/> (with <paramref name="intermediates"/>)
    /// for <paramref name="purpose"/>, within its validity. Revocation is not checked (test CAs publish no lists).
    /// </summary>
    public static bool Chains(X509Certificate2 certificate, X509Certificate2Collection roots, Oid purpose, X509Certificate2Collection? intermediates = null)
    {
        ArgumentNullException.ThrowIfNull(certificate);
        ArgumentNullException.ThrowIfNull(roots);
        ArgumentNullException.ThrowIfNull(purpose);
        using var chain = new X509Chain();
        chain.ChainPolicy.TrustMode = X509ChainTrustMode.CustomRootTrust;
        chain.ChainPolicy.CustomTrustStore.AddRange(roots);
        chain.ChainPolicy.RevocationMode = X509RevocationMode.NoCheck;
        chain.ChainPolicy.ApplicationPolicy.Add(purpose);
        if (intermediates is not null)
        {
            chain.ChainPolicy.ExtraStore.AddRange(intermediates);
        }

        var built = chain.Build(certificate);
        foreach (var element in chain.ChainElements)
        {
            element.Certificate.Dispose();
        }

        return built;
    }

    private static void Readable(string file)
    {
        if (!File.Exists(file))
        {
            throw new InputException(file, string.Empty, "no such file");
        }
    }
}

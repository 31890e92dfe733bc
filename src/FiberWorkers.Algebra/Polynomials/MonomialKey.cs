namespace FiberWorkers.Algebra.Polynomials;

/// <summary>An exponent vector used as a dictionary key (structural equality, cached hash).</summary>
internal readonly struct MonomialKey : IEquatable<MonomialKey>
{
    private readonly int _hash;

    public MonomialKey(int[] exponents)
    {
        Exponents = exponents;
        var hash = new HashCode();
        foreach (var e in exponents)
        {
            hash.Add(e);
        }

        _hash = hash.ToHashCode();
    }

    public int[] Exponents { get; }

    public bool Equals(MonomialKey other) => _hash == other._hash && Exponents.AsSpan().SequenceEqual(other.Exponents);

    public override bool Equals(object? obj) => obj is MonomialKey other && Equals(other);

    public override int GetHashCode() => _hash;
}

namespace FiberWorkers.Algebra.Polynomials;

/// <summary>An exponent vector used as a dictionary key (structural equality, cached hash); the array must not change.</summary>
public readonly struct MonomialKey : IEquatable<MonomialKey>
{
    private readonly int _hash;

    /// <summary>Wraps <paramref name="exponents"/> (not copied).</summary>
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

    /// <summary>The exponent vector.</summary>
    public int[] Exponents { get; }

    /// <inheritdoc />
    public bool Equals(MonomialKey other) => _hash == other._hash && Exponents.AsSpan().SequenceEqual(other.Exponents);

    /// <inheritdoc />
    public override bool Equals(object? obj) => obj is MonomialKey other && Equals(other);

    /// <inheritdoc />
    public override int GetHashCode() => _hash;
}

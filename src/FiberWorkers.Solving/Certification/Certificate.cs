namespace FiberWorkers.Solving.Certification;

/// <summary>Whether a certified solution of a real system is real.</summary>
public enum Reality
{
    /// <summary>The system has non-real coefficients (a complex parameter point): reality is not asked.</summary>
    NotApplicable,

    /// <summary>The associated zero is certified real.</summary>
    Real,

    /// <summary>The associated zero is certified non-real.</summary>
    NonReal,

    /// <summary>Neither test succeeded (the point is not accurate enough or too ill conditioned).</summary>
    Undecided,
}

/// <summary>
/// Smale's alpha-theory quantities at a point x: β = ‖Df(x)⁻¹f(x)‖, an upper bound on γ, α = β·γ, and the
/// verdicts drawn from them. Computed in double precision with a rounding allowance on f(x) (see
/// <see cref="FloatingPointCaveat"/>).
/// </summary>
/// <param name="ApproximateZero">α &lt; (13 − 3√17)/4: Newton converges quadratically from x to a zero ξ with ‖x − ξ‖ ≤ 2β.</param>
/// <param name="Alpha">The bound on α(f, x).</param>
/// <param name="Beta">The bound on β(f, x), rounding allowance included.</param>
/// <param name="Gamma">The Shub–Smale upper bound on γ(f, x).</param>
/// <param name="Reality">Real, non-real, undecided, or not applicable.</param>
public sealed record Certificate(bool ApproximateZero, double Alpha, double Beta, double Gamma, Reality Reality)
{
    /// <summary>Stated next to every certified result.</summary>
    public const string FloatingPointCaveat =
        "alpha-theory certificates are computed in double precision with an allowance for rounding in F(x); "
        + "they are not interval-verified, and completeness (no solution missed) rests on the homotopy's "
        + "probability-one guarantee, not on the certificate";
}

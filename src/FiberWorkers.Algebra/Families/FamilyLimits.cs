namespace FiberWorkers.Algebra.Families;

/// <summary>
/// Limits that keep a family file from exhausting a process (a server reads files written by hand).
/// Every limit is checked while reading; exceeding one is an input error that names the limit and the value.
/// </summary>
public sealed record FamilyLimits
{
    /// <summary>The defaults, suitable for a shared server.</summary>
    public static FamilyLimits Default { get; } = new();

    /// <summary>Largest family file in bytes. Default 1 MiB.</summary>
    public int MaxFileBytes { get; init; } = 1 << 20;

    /// <summary>Most unknowns (and so equations). Default 40.</summary>
    public int MaxUnknowns { get; init; } = 40;

    /// <summary>Most parameters. Default 16.</summary>
    public int MaxParameters { get; init; } = 16;

    /// <summary>Most named constants. Default 1000.</summary>
    public int MaxConstants { get; init; } = 1000;

    /// <summary>Most expression nodes (numbers, names, operators) in one equation. Default 20,000.</summary>
    public int MaxExpressionNodes { get; init; } = 20_000;

    /// <summary>Deepest nesting of parentheses and unary minus signs in one equation; each counts one level. Default 200.</summary>
    public int MaxNestingDepth { get; init; } = 200;

    /// <summary>Highest total degree of an equation, in the unknowns and in the parameters separately. Default 32.</summary>
    public int MaxDegree { get; init; } = 32;

    /// <summary>Most terms of one equation after expansion. Default 50,000.</summary>
    public int MaxTerms { get; init; } = 50_000;

    /// <summary>
    /// Most work spent expanding all equations of a family, in exponent operations: multiplying an m-term by an
    /// n-term polynomial over v variables (unknowns and parameters) costs m·n·v, adding them (m + n)·v. The default,
    /// 10,000,000, is about half a second of expansion.
    /// </summary>
    public long MaxExpansionWork { get; init; } = 10_000_000;

    /// <summary>Longest name of an unknown, parameter or constant, in characters. Default 64.</summary>
    public int MaxNameLength { get; init; } = 64;
}

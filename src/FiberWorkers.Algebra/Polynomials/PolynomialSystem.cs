using System.Numerics;
using FiberWorkers.Algebra.Evaluation;

namespace FiberWorkers.Algebra.Polynomials;

/// <summary>
/// A square (or, for derived systems, rectangular) polynomial system F(x; p): equations over the variables
/// unknowns ++ parameters, in that order. Immutable.
/// </summary>
public sealed class PolynomialSystem
{
    /// <summary>Creates a system; every equation must be over unknowns.Count + parameters.Count variables.</summary>
    public PolynomialSystem(IReadOnlyList<string> unknowns, IReadOnlyList<string> parameters, IReadOnlyList<Polynomial> equations)
    {
        ArgumentNullException.ThrowIfNull(unknowns);
        ArgumentNullException.ThrowIfNull(parameters);
        ArgumentNullException.ThrowIfNull(equations);
        var variableCount = unknowns.Count + parameters.Count;
        foreach (var equation in equations)
        {
            if (equation.VariableCount != variableCount)
            {
                throw new ArgumentException(
                    $"an equation is over {equation.VariableCount} variables, expected {variableCount}", nameof(equations));
            }
        }

        Unknowns = [.. unknowns];
        Parameters = [.. parameters];
        Equations = [.. equations];
        Degrees = [.. Equations.Select(e => e.Degree(0, unknowns.Count))];
    }

    /// <summary>Names of the unknowns x (variables 0 .. n−1).</summary>
    public IReadOnlyList<string> Unknowns { get; }

    /// <summary>Names of the parameters p (variables n .. n+m−1).</summary>
    public IReadOnlyList<string> Parameters { get; }

    /// <summary>The equations, each over unknowns ++ parameters.</summary>
    public IReadOnlyList<Polynomial> Equations { get; }

    /// <summary>Degree of each equation in the unknowns.</summary>
    public IReadOnlyList<int> Degrees { get; }

    /// <summary>n, the number of unknowns.</summary>
    public int UnknownCount => Unknowns.Count;

    /// <summary>m, the number of parameters.</summary>
    public int ParameterCount => Parameters.Count;

    /// <summary>True when there are as many equations as unknowns.</summary>
    public bool IsSquare => Equations.Count == Unknowns.Count;

    /// <summary>The Bézout number: the product of the equations' degrees in the unknowns.</summary>
    public BigInteger BezoutNumber
    {
        get
        {
            var product = BigInteger.One;
            foreach (var d in Degrees)
            {
                product *= d;
            }

            return product;
        }
    }

    /// <summary>
    /// The homogenized system in the unknowns: a new unknown h is inserted first, and each equation f_i of
    /// degree d_i becomes h^d_i · f_i(x / h). Its solutions with h = 0 are the solutions at infinity.
    /// </summary>
    public PolynomialSystem Homogenize(string? homogenizingName = null)
    {
        var name = homogenizingName ?? FreshName("h");
        if (Unknowns.Contains(name) || Parameters.Contains(name))
        {
            throw new ArgumentException($"the name '{name}' is already used", nameof(homogenizingName));
        }

        var equations = Equations.Select(e => e.Homogenize(0, UnknownCount)).ToArray();
        return new PolynomialSystem([name, .. Unknowns], Parameters, equations);
    }

    /// <summary>
    /// The system F(x; p) + q: one new parameter per equation, added to its constant term (named by
    /// <paramref name="prefix"/> and made unique). Its fiber over (p, q = −F(x₀; p)) contains any chosen x₀, which
    /// is how monodromy gets its first solution; at q = 0 it is the original family.
    /// </summary>
    public PolynomialSystem WithConstantParameters(string prefix = "q")
    {
        var names = new List<string>(Parameters);
        var added = new string[Equations.Count];
        for (var i = 0; i < Equations.Count; i++)
        {
            var candidate = $"{prefix}{i + 1}";
            for (var k = 1; Unknowns.Contains(candidate) || names.Contains(candidate); k++)
            {
                candidate = $"{prefix}{i + 1}_{k}";
            }

            added[i] = candidate;
            names.Add(candidate);
        }

        var oldCount = UnknownCount + ParameterCount;
        var newCount = oldCount + Equations.Count;
        var map = Enumerable.Range(0, oldCount).ToArray();
        var equations = new Polynomial[Equations.Count];
        for (var i = 0; i < Equations.Count; i++)
        {
            equations[i] = Equations[i].Remap(newCount, map).Add(Polynomial.Variable(newCount, oldCount + i));
        }

        return new PolynomialSystem(Unknowns, names, equations);
    }

    /// <summary>Largest degree of any equation in the parameters.</summary>
    public int ParameterDegree => Equations.Count == 0 ? 0 : Equations.Max(e => e.Degree(UnknownCount, ParameterCount));

    /// <summary>Compiles the system into an allocation-free evaluator of F, ∂F/∂x and ∂F/∂p.</summary>
    public CompiledSystem Compile() => SystemCompiler.Compile(this);

    /// <summary>A name of the form prefix, prefix_1, prefix_2, ... that no unknown or parameter uses.</summary>
    public string FreshName(string prefix)
    {
        var candidate = prefix;
        for (var k = 1; Unknowns.Contains(candidate) || Parameters.Contains(candidate); k++)
        {
            candidate = $"{prefix}_{k}";
        }

        return candidate;
    }
}

using System.Numerics;

namespace FiberWorkers.Algebra.Polynomials;

/// <summary>
/// An immutable sparse multivariate polynomial with real coefficients over a fixed number of variables.
/// Terms are kept in a canonical order (graded, then lexicographic, descending) with no zero coefficients,
/// so equal polynomials have equal term lists.
/// </summary>
public sealed class Polynomial
{
    private readonly int[] _exponents;
    private readonly double[] _coefficients;

    private Polynomial(int variableCount, int[] exponents, double[] coefficients)
    {
        VariableCount = variableCount;
        _exponents = exponents;
        _coefficients = coefficients;
    }

    /// <summary>Number of variables every term has an exponent for.</summary>
    public int VariableCount { get; }

    /// <summary>Number of nonzero terms.</summary>
    public int TermCount => _coefficients.Length;

    /// <summary>True when the polynomial has no terms.</summary>
    public bool IsZero => _coefficients.Length == 0;

    /// <summary>The exponents of term <paramref name="term"/>, one per variable.</summary>
    public ReadOnlySpan<int> ExponentsOf(int term) => _exponents.AsSpan(term * VariableCount, VariableCount);

    /// <summary>The coefficient of term <paramref name="term"/>.</summary>
    public double CoefficientOf(int term) => _coefficients[term];

    /// <summary>The zero polynomial.</summary>
    public static Polynomial Zero(int variableCount) => new(variableCount, [], []);

    /// <summary>A constant polynomial.</summary>
    public static Polynomial Constant(int variableCount, double value)
    {
        ArgumentOutOfRangeException.ThrowIfNegative(variableCount);
        return value == 0 ? Zero(variableCount) : new(variableCount, new int[variableCount], [value]);
    }

    /// <summary>The polynomial x_index.</summary>
    public static Polynomial Variable(int variableCount, int index)
    {
        ArgumentOutOfRangeException.ThrowIfNegative(index);
        ArgumentOutOfRangeException.ThrowIfGreaterThanOrEqual(index, variableCount);
        var exponents = new int[variableCount];
        exponents[index] = 1;
        return new(variableCount, exponents, [1.0]);
    }

    /// <summary>Builds a polynomial from (exponents, coefficient) pairs; equal exponents are summed.</summary>
    public static Polynomial FromTerms(int variableCount, IEnumerable<(int[] Exponents, double Coefficient)> terms)
    {
        ArgumentNullException.ThrowIfNull(terms);
        var builder = new Dictionary<MonomialKey, double>();
        foreach (var (exponents, coefficient) in terms)
        {
            if (exponents.Length != variableCount)
            {
                throw new ArgumentException($"term has {exponents.Length} exponents, expected {variableCount}", nameof(terms));
            }

            if (exponents.Any(e => e < 0))
            {
                throw new ArgumentException("exponents must be non-negative", nameof(terms));
            }

            Accumulate(builder, (int[])exponents.Clone(), coefficient);
        }

        return FromDictionary(variableCount, builder);
    }

    /// <summary>True when every term has all exponents zero (including the zero polynomial).</summary>
    public bool IsConstant
    {
        get
        {
            foreach (var e in _exponents)
            {
                if (e != 0)
                {
                    return false;
                }
            }

            return true;
        }
    }

    /// <summary>The coefficient of the constant monomial.</summary>
    public double ConstantTerm
    {
        get
        {
            for (var t = 0; t < TermCount; t++)
            {
                if (IsConstantTerm(t))
                {
                    return _coefficients[t];
                }
            }

            return 0;
        }
    }

    /// <summary>The largest total degree over the variables [start, start + count).</summary>
    public int Degree(int start, int count)
    {
        var degree = 0;
        for (var t = 0; t < TermCount; t++)
        {
            var exponents = ExponentsOf(t).Slice(start, count);
            var sum = 0;
            foreach (var e in exponents)
            {
                sum += e;
            }

            degree = Math.Max(degree, sum);
        }

        return degree;
    }

    /// <summary>The largest total degree over all variables.</summary>
    public int TotalDegree => Degree(0, VariableCount);

    /// <summary>True when any term has a positive exponent of a variable in [start, start + count).</summary>
    public bool DependsOn(int start, int count) => Degree(start, count) > 0;

    /// <summary>this + other.</summary>
    public Polynomial Add(Polynomial other) => Combine(other, 1.0);

    /// <summary>this − other.</summary>
    public Polynomial Subtract(Polynomial other) => Combine(other, -1.0);

    /// <summary>factor · this.</summary>
    public Polynomial Scale(double factor)
    {
        if (factor == 0)
        {
            return Zero(VariableCount);
        }

        var coefficients = new double[TermCount];
        for (var t = 0; t < TermCount; t++)
        {
            coefficients[t] = _coefficients[t] * factor;
        }

        return new(VariableCount, _exponents, coefficients);
    }

    /// <summary>−this.</summary>
    public Polynomial Negate() => Scale(-1.0);

    /// <summary>this · other; throws <see cref="PolynomialSizeException"/> past <paramref name="maxTerms"/>.</summary>
    public Polynomial Multiply(Polynomial other, int maxTerms = int.MaxValue)
    {
        ArgumentNullException.ThrowIfNull(other);
        RequireSameVariables(other);
        if ((long)TermCount * other.TermCount > 4L * maxTerms && maxTerms != int.MaxValue)
        {
            // Far more products than allowed terms: the expansion would almost surely exceed the limit,
            // and computing it first would be the denial of service the limit exists to prevent.
            throw new PolynomialSizeException($"the expansion exceeds {maxTerms} terms (limit)");
        }

        var builder = new Dictionary<MonomialKey, double>();
        for (var i = 0; i < TermCount; i++)
        {
            var left = ExponentsOf(i);
            for (var j = 0; j < other.TermCount; j++)
            {
                var right = other.ExponentsOf(j);
                var exponents = new int[VariableCount];
                for (var v = 0; v < VariableCount; v++)
                {
                    exponents[v] = left[v] + right[v];
                }

                Accumulate(builder, exponents, _coefficients[i] * other._coefficients[j]);
            }

            if (builder.Count > maxTerms)
            {
                throw new PolynomialSizeException($"the expansion exceeds {maxTerms} terms (limit)");
            }
        }

        var product = FromDictionary(VariableCount, builder);
        if (product.TermCount > maxTerms)
        {
            throw new PolynomialSizeException($"the expansion exceeds {maxTerms} terms (limit)");
        }

        return product;
    }

    /// <summary>this^exponent by repeated squaring.</summary>
    public Polynomial Power(int exponent, int maxTerms = int.MaxValue)
    {
        ArgumentOutOfRangeException.ThrowIfNegative(exponent);
        var result = Constant(VariableCount, 1.0);
        var square = this;
        while (exponent > 0)
        {
            if ((exponent & 1) == 1)
            {
                result = result.Multiply(square, maxTerms);
            }

            exponent >>= 1;
            if (exponent > 0)
            {
                square = square.Multiply(square, maxTerms);
            }
        }

        return result;
    }

    /// <summary>∂/∂x_variable.</summary>
    public Polynomial Derivative(int variable)
    {
        ArgumentOutOfRangeException.ThrowIfNegative(variable);
        ArgumentOutOfRangeException.ThrowIfGreaterThanOrEqual(variable, VariableCount);
        var builder = new Dictionary<MonomialKey, double>();
        for (var t = 0; t < TermCount; t++)
        {
            var e = ExponentsOf(t);
            if (e[variable] == 0)
            {
                continue;
            }

            var exponents = e.ToArray();
            exponents[variable]--;
            Accumulate(builder, exponents, _coefficients[t] * e[variable]);
        }

        return FromDictionary(VariableCount, builder);
    }

    /// <summary>
    /// Replaces every variable v by <paramref name="images"/>[v], a polynomial over a new variable set.
    /// Used to build derived systems (lines in parameter space, extended systems).
    /// </summary>
    public Polynomial Substitute(IReadOnlyList<Polynomial> images, int maxTerms = int.MaxValue)
    {
        ArgumentNullException.ThrowIfNull(images);
        if (images.Count != VariableCount)
        {
            throw new ArgumentException($"need {VariableCount} images, got {images.Count}", nameof(images));
        }

        var newCount = VariableCount == 0 ? 0 : images[0].VariableCount;
        foreach (var image in images)
        {
            if (image.VariableCount != newCount)
            {
                throw new ArgumentException("all images must share one variable set", nameof(images));
            }
        }

        var powers = new Dictionary<(int Variable, int Exponent), Polynomial>();
        Polynomial PowerOf(int v, int k)
        {
            if (!powers.TryGetValue((v, k), out var value))
            {
                value = k == 1 ? images[v] : PowerOf(v, k - 1).Multiply(images[v], maxTerms);
                powers[(v, k)] = value;
            }

            return value;
        }

        var result = Zero(newCount);
        for (var t = 0; t < TermCount; t++)
        {
            var term = Constant(newCount, _coefficients[t]);
            var e = ExponentsOf(t);
            for (var v = 0; v < VariableCount; v++)
            {
                if (e[v] > 0)
                {
                    term = term.Multiply(PowerOf(v, e[v]), maxTerms);
                }
            }

            result = result.Add(term);
        }

        return result;
    }

    /// <summary>
    /// Moves variable v to index <paramref name="map"/>[v] of a polynomial over <paramref name="newVariableCount"/>
    /// variables; every new variable that no old one maps to gets exponent zero.
    /// </summary>
    public Polynomial Remap(int newVariableCount, ReadOnlySpan<int> map)
    {
        if (map.Length != VariableCount)
        {
            throw new ArgumentException($"need {VariableCount} indices, got {map.Length}", nameof(map));
        }

        var builder = new Dictionary<MonomialKey, double>();
        for (var t = 0; t < TermCount; t++)
        {
            var e = ExponentsOf(t);
            var exponents = new int[newVariableCount];
            for (var v = 0; v < VariableCount; v++)
            {
                exponents[map[v]] += e[v];
            }

            Accumulate(builder, exponents, _coefficients[t]);
        }

        return FromDictionary(newVariableCount, builder);
    }

    /// <summary>
    /// Homogenizes in the variables [start, start + count) with a new variable inserted at index
    /// <paramref name="start"/>: each term gets h^(d − its degree in those variables), d the polynomial's degree.
    /// </summary>
    public Polynomial Homogenize(int start, int count)
    {
        var degree = Degree(start, count);
        var builder = new Dictionary<MonomialKey, double>();
        for (var t = 0; t < TermCount; t++)
        {
            var e = ExponentsOf(t);
            var exponents = new int[VariableCount + 1];
            var termDegree = 0;
            for (var v = 0; v < VariableCount; v++)
            {
                var target = v < start ? v : v + 1;
                exponents[target] = e[v];
                if (v >= start && v < start + count)
                {
                    termDegree += e[v];
                }
            }

            exponents[start] = degree - termDegree;
            Accumulate(builder, exponents, _coefficients[t]);
        }

        return FromDictionary(VariableCount + 1, builder);
    }

    /// <summary>Term-by-term evaluation at complex values (reference path; the compiled evaluator is the fast one).</summary>
    public Complex Evaluate(ReadOnlySpan<Complex> values)
    {
        if (values.Length != VariableCount)
        {
            throw new ArgumentException($"need {VariableCount} values, got {values.Length}", nameof(values));
        }

        var sum = Complex.Zero;
        for (var t = 0; t < TermCount; t++)
        {
            Complex term = _coefficients[t];
            var e = ExponentsOf(t);
            for (var v = 0; v < VariableCount; v++)
            {
                for (var k = 0; k < e[v]; k++)
                {
                    term *= values[v];
                }
            }

            sum += term;
        }

        return sum;
    }

    /// <summary>Structural equality of term lists (same variables, exponents and coefficients).</summary>
    public bool SameAs(Polynomial other)
    {
        ArgumentNullException.ThrowIfNull(other);
        return VariableCount == other.VariableCount
            && _coefficients.AsSpan().SequenceEqual(other._coefficients)
            && _exponents.AsSpan().SequenceEqual(other._exponents);
    }

    private bool IsConstantTerm(int term)
    {
        foreach (var e in ExponentsOf(term))
        {
            if (e != 0)
            {
                return false;
            }
        }

        return true;
    }

    private Polynomial Combine(Polynomial other, double sign)
    {
        ArgumentNullException.ThrowIfNull(other);
        RequireSameVariables(other);
        var builder = new Dictionary<MonomialKey, double>(TermCount + other.TermCount);
        for (var t = 0; t < TermCount; t++)
        {
            Accumulate(builder, ExponentsOf(t).ToArray(), _coefficients[t]);
        }

        for (var t = 0; t < other.TermCount; t++)
        {
            Accumulate(builder, other.ExponentsOf(t).ToArray(), sign * other._coefficients[t]);
        }

        return FromDictionary(VariableCount, builder);
    }

    private void RequireSameVariables(Polynomial other)
    {
        if (other.VariableCount != VariableCount)
        {
            throw new ArgumentException(
                $"polynomials over {VariableCount} and {other.VariableCount} variables cannot be combined", nameof(other));
        }
    }

    private static void Accumulate(Dictionary<MonomialKey, double> builder, int[] exponents, double coefficient)
    {
        var key = new MonomialKey(exponents);
        builder[key] = builder.TryGetValue(key, out var existing) ? existing + coefficient : coefficient;
    }

    private static Polynomial FromDictionary(int variableCount, Dictionary<MonomialKey, double> builder)
    {
        var keys = new List<int[]>(builder.Count);
        foreach (var (key, coefficient) in builder)
        {
            if (coefficient != 0)
            {
                keys.Add(key.Exponents);
            }
        }

        keys.Sort(CompareGradedDescending);
        var exponents = new int[keys.Count * variableCount];
        var coefficients = new double[keys.Count];
        for (var t = 0; t < keys.Count; t++)
        {
            keys[t].CopyTo(exponents, t * variableCount);
            coefficients[t] = builder[new MonomialKey(keys[t])];
        }

        return new(variableCount, exponents, coefficients);
    }

    private static int CompareGradedDescending(int[] a, int[] b)
    {
        var degreeA = 0;
        var degreeB = 0;
        for (var v = 0; v < a.Length; v++)
        {
            degreeA += a[v];
            degreeB += b[v];
        }

        if (degreeA != degreeB)
        {
            return degreeB.CompareTo(degreeA);
        }

        for (var v = 0; v < a.Length; v++)
        {
            if (a[v] != b[v])
            {
                return b[v].CompareTo(a[v]);
            }
        }

        return 0;
    }
}

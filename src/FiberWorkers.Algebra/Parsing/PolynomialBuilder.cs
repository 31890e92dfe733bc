using FiberWorkers.Algebra.Families;
using FiberWorkers.Algebra.Polynomials;

namespace FiberWorkers.Algebra.Parsing;

/// <summary>
/// Expands a parsed equation into a polynomial over unknowns ++ parameters, substituting constants.
/// Denominators may hold only numbers and constants. Problems are reported with the column they occur at.
/// </summary>
internal sealed class PolynomialBuilder
{
    private readonly IReadOnlyDictionary<string, int> _variableIndex;
    private readonly IReadOnlyDictionary<string, double> _constants;
    private readonly IReadOnlySet<string> _unknowns;
    private readonly int _variableCount;
    private readonly int _unknownCount;
    private readonly FamilyLimits _limits;
    private long _work;

    public PolynomialBuilder(
        IReadOnlyList<string> unknowns, IReadOnlyList<string> parameters, IReadOnlyDictionary<string, double> constants, FamilyLimits limits)
    {
        var index = new Dictionary<string, int>(StringComparer.Ordinal);
        for (var i = 0; i < unknowns.Count; i++)
        {
            index.TryAdd(unknowns[i], i);
        }

        for (var k = 0; k < parameters.Count; k++)
        {
            index.TryAdd(parameters[k], unknowns.Count + k);
        }

        _variableIndex = index;
        _constants = constants;
        _unknowns = unknowns.ToHashSet(StringComparer.Ordinal);
        _unknownCount = unknowns.Count;
        _variableCount = unknowns.Count + parameters.Count;
        _limits = limits;
    }

    /// <summary>
    /// Work spent so far on all equations built with this builder, in exponent operations: a product of an m-term and
    /// an n-term polynomial over v variables costs m·n·v, a sum (m + n)·v. Checked against
    /// <see cref="FamilyLimits.MaxExpansionWork"/>.
    /// </summary>
    public long Work => _work;

    /// <summary>True once <see cref="Work"/> has passed the limit: every further equation would fail at once.</summary>
    public bool WorkExhausted => _work > _limits.MaxExpansionWork;

    /// <summary>All names an equation may use, for suggestions.</summary>
    public IEnumerable<string> KnownNames => _variableIndex.Keys.Concat(_constants.Keys);

    public Polynomial Build(ExpressionNode node)
    {
        switch (node)
        {
            case NumberNode number:
                return Polynomial.Constant(_variableCount, number.Value);
            case NameNode name:
                if (_variableIndex.TryGetValue(name.Name, out var variable))
                {
                    return Polynomial.Variable(_variableCount, variable);
                }

                if (_constants.TryGetValue(name.Name, out var constant))
                {
                    return Polynomial.Constant(_variableCount, constant);
                }

                throw new ExpressionSyntaxException(
                    name.Column, $"unknown name '{Shorten(name.Name)}'{NameSuggester.Hint(name.Name, KnownNames)}");
            case NegateNode negate:
                var operand = Build(negate.Operand);
                Charge(negate.Column, operand.TermCount);
                return operand.Negate();
            case PowerNode power:
                return Power(power.Column, Build(power.Base), power.Exponent);
            case BinaryNode binary:
                return BuildChain(binary);
            default:
                throw new InvalidOperationException($"unexpected node {node.GetType().Name}");
        }
    }

    // A sum or product of k operands parses into a left-leaning chain k levels deep. Folding the chain in a
    // loop keeps the stack depth bounded by the nesting limit instead of by the length of the equation:
    // recursing once per term overflowed the stack (a process crash) at about 40,000 terms.
    private Polynomial BuildChain(BinaryNode top)
    {
        var spine = new List<BinaryNode>();
        ExpressionNode leftmost = top;
        while (leftmost is BinaryNode binary)
        {
            spine.Add(binary);
            leftmost = binary.Left;
        }

        var result = Build(leftmost);
        for (var i = spine.Count - 1; i >= 0; i--)
        {
            result = Apply(spine[i], result);
        }

        return result;
    }

    private Polynomial Apply(BinaryNode binary, Polynomial left)
    {
        if (binary.Operator == BinaryOperator.Divide)
        {
            var denominator = ConstantDenominator(binary);
            Charge(binary.Column, left.TermCount);

            // A product with the reciprocal rather than Scale: the same roundings, but coefficients that underflow
            // to zero (1e-320*x/1e10) are dropped, so that an equation that vanishes is reported as zero.
            return Finite(binary.Column, left.Multiply(Polynomial.Constant(_variableCount, 1.0 / denominator)));
        }

        var right = Build(binary.Right);
        if (binary.Operator == BinaryOperator.Multiply)
        {
            return Multiply(binary.Column, left, right);
        }

        Charge(binary.Column, (long)left.TermCount + right.TermCount);
        return Finite(binary.Column, binary.Operator == BinaryOperator.Add ? left.Add(right) : left.Subtract(right));
    }

    private Polynomial Multiply(int column, Polynomial left, Polynomial right)
    {
        var product = Checked(column, () => left.Multiply(right, _limits.MaxTerms));
        Charge(column, (long)left.TermCount * right.TermCount);
        return product;
    }

    // Repeated squaring in the same order as Polynomial.Power (so the coefficients are the same to the last bit),
    // one multiplication at a time so that each is charged to the work limit and checked against the others.
    private Polynomial Power(int column, Polynomial baseValue, int exponent)
    {
        var result = Polynomial.Constant(_variableCount, 1.0);
        var square = baseValue;
        while (exponent > 0)
        {
            if ((exponent & 1) == 1)
            {
                result = Multiply(column, result, square);
            }

            exponent >>= 1;
            if (exponent > 0)
            {
                square = Multiply(column, square, square);
            }
        }

        return result;
    }

    // Every limit on one equation's size still lets sums and products of large intermediate polynomials repeat
    // (about 0.1 s of expansion per hundred characters here, hours for a file under the size limit), so the work
    // of the whole family is bounded as well.
    private void Charge(int column, long terms)
    {
        _work += terms * Math.Max(1, _variableCount);
        if (WorkExhausted)
        {
            throw new ExpressionSyntaxException(
                column, $"expanding the equations takes more than {_limits.MaxExpansionWork} exponent operations (limit)");
        }
    }

    private static string Shorten(string text) => text.Length <= 40 ? text : string.Concat(text.AsSpan(0, 37), "...");

    // Finite numbers can combine into infinite coefficients (1e300 * 1e300, 1e308 + 1e308); a family holding one
    // evaluates to infinity or NaN everywhere, so the operation that overflows is reported at its column.
    private static Polynomial Finite(int column, Polynomial result)
    {
        for (var t = 0; t < result.TermCount; t++)
        {
            if (!double.IsFinite(result.CoefficientOf(t)))
            {
                throw new ExpressionSyntaxException(
                    column, $"a coefficient overflows double precision here (it becomes {result.CoefficientOf(t)}); rescale the equation or its constants");
            }
        }

        return result;
    }

    private double ConstantDenominator(BinaryNode division)
    {
        if (FirstVariable(division.Right) is { } offending)
        {
            var kind = _unknowns.Contains(offending.Name) ? "unknown" : "parameter";
            throw new ExpressionSyntaxException(
                offending.Column,
                $"the denominator contains the {kind} '{offending.Name}'; only numbers and constants may appear in a denominator");
        }

        var value = Build(division.Right).ConstantTerm;
        if (value == 0)
        {
            throw new ExpressionSyntaxException(division.Column, "division by zero: the denominator evaluates to 0");
        }

        var reciprocal = 1.0 / value;
        if (!double.IsFinite(reciprocal))
        {
            throw new ExpressionSyntaxException(division.Column, $"the denominator {value:R} is too small to divide by");
        }

        return value;
    }

    /// <summary>The leftmost unknown or parameter in a subtree; iterative for the reason given at <see cref="BuildChain"/>.</summary>
    private NameNode? FirstVariable(ExpressionNode root)
    {
        var pending = new Stack<ExpressionNode>();
        pending.Push(root);
        while (pending.TryPop(out var node))
        {
            switch (node)
            {
                case NameNode name when _variableIndex.ContainsKey(name.Name):
                    return name;
                case NegateNode negate:
                    pending.Push(negate.Operand);
                    break;
                case PowerNode power:
                    pending.Push(power.Base);
                    break;
                case BinaryNode binary:
                    pending.Push(binary.Right);
                    pending.Push(binary.Left);
                    break;
            }
        }

        return null;
    }

    private Polynomial Checked(int column, Func<Polynomial> operation)
    {
        Polynomial result;
        try
        {
            result = operation();
        }
        catch (PolynomialSizeException e)
        {
            throw new ExpressionSyntaxException(column, e.Message);
        }

        var unknownDegree = result.Degree(0, _unknownCount);
        if (unknownDegree > _limits.MaxDegree)
        {
            throw new ExpressionSyntaxException(
                column, $"the degree in the unknowns reaches {unknownDegree}, above the limit {_limits.MaxDegree}");
        }

        var parameterDegree = result.Degree(_unknownCount, _variableCount - _unknownCount);
        if (parameterDegree > _limits.MaxDegree)
        {
            throw new ExpressionSyntaxException(
                column, $"the degree in the parameters reaches {parameterDegree}, above the limit {_limits.MaxDegree}");
        }

        return Finite(column, result);
    }
}

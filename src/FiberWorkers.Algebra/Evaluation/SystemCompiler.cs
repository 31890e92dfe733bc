using FiberWorkers.Algebra.Polynomials;

namespace FiberWorkers.Algebra.Evaluation;

/// <summary>
/// Turns a polynomial system into straight-line programs. Every monomial that F, ∂F/∂x or ∂F/∂p needs is
/// built once, by one complex product from a smaller monomial already built (or a square of one), and the
/// outputs are real linear combinations of those registers.
/// </summary>
internal static class SystemCompiler
{
    public static CompiledSystem Compile(PolynomialSystem system)
    {
        var n = system.UnknownCount;
        var m = system.ParameterCount;
        var variableCount = n + m;
        var equationCount = system.Equations.Count;
        var dag = new MonomialDag(variableCount);

        var values = new List<(int Target, List<(int[] Exponents, double Coefficient)> Terms)>();
        var jacobian = new List<(int Target, List<(int[] Exponents, double Coefficient)> Terms)>();
        var parameterJacobian = new List<(int Target, List<(int[] Exponents, double Coefficient)> Terms)>();
        for (var i = 0; i < equationCount; i++)
        {
            var equation = system.Equations[i];
            values.Add((i, Terms(equation)));
            for (var j = 0; j < n; j++)
            {
                var derivative = equation.Derivative(j);
                if (!derivative.IsZero)
                {
                    jacobian.Add((i * n + j, Terms(derivative)));
                }
            }

            for (var k = 0; k < m; k++)
            {
                var derivative = equation.Derivative(n + k);
                if (!derivative.IsZero)
                {
                    parameterJacobian.Add((i * m + k, Terms(derivative)));
                }
            }
        }

        var valueBlock = BuildBlock(dag, values, equationCount);
        var jacobianBlock = BuildBlock(dag, jacobian, equationCount * n);
        var parameterBlock = BuildBlock(dag, parameterJacobian, equationCount * m);

        var products = dag.Products;
        var valueProgram = new EvaluationProgram(Needed(products, variableCount, valueBlock), valueBlock, null, null);
        var jacobianProgram = new EvaluationProgram(
            Needed(products, variableCount, valueBlock, jacobianBlock), valueBlock, jacobianBlock, null);
        var fullProgram = new EvaluationProgram(
            Needed(products, variableCount, valueBlock, jacobianBlock, parameterBlock), valueBlock, jacobianBlock, parameterBlock);
        return new CompiledSystem(system, dag.RegisterCount, valueProgram, jacobianProgram, fullProgram);
    }

    private static List<(int[] Exponents, double Coefficient)> Terms(Polynomial polynomial)
    {
        var terms = new List<(int[] Exponents, double Coefficient)>(polynomial.TermCount);
        for (var t = 0; t < polynomial.TermCount; t++)
        {
            terms.Add((polynomial.ExponentsOf(t).ToArray(), polynomial.CoefficientOf(t)));
        }

        return terms;
    }

    private static OutputBlock BuildBlock(
        MonomialDag dag, List<(int Target, List<(int[] Exponents, double Coefficient)> Terms)> outputs, int length)
    {
        var linearOutputs = new List<LinearOutput>(outputs.Count);
        var linearTerms = new List<LinearTerm>();
        foreach (var (target, terms) in outputs)
        {
            var constant = 0.0;
            var start = linearTerms.Count;
            foreach (var (exponents, coefficient) in terms)
            {
                var register = dag.Ensure(exponents);
                if (register < 0)
                {
                    constant += coefficient;
                }
                else
                {
                    linearTerms.Add(new LinearTerm(register, coefficient));
                }
            }

            linearOutputs.Add(new LinearOutput(target, start, linearTerms.Count - start, constant));
        }

        return new OutputBlock([.. linearOutputs], [.. linearTerms], length);
    }

    /// <summary>The products some block reads, directly or through other products, in build order.</summary>
    private static MulInstruction[] Needed(IReadOnlyList<MulInstruction> products, int inputCount, params OutputBlock[] blocks)
    {
        var registerCount = inputCount + products.Count;
        var needed = new bool[registerCount];
        foreach (var block in blocks)
        {
            foreach (var term in block.Terms)
            {
                needed[term.Register] = true;
            }
        }

        for (var k = products.Count - 1; k >= 0; k--)
        {
            var product = products[k];
            if (needed[product.Target])
            {
                needed[product.Left] = true;
                needed[product.Right] = true;
            }
        }

        return [.. products.Where(p => needed[p.Target])];
    }

    /// <summary>Registers 0 .. V−1 hold the variables; each later register is one product.</summary>
    private sealed class MonomialDag(int variableCount)
    {
        private readonly Dictionary<MonomialKey, int> _registerOf = [];
        private readonly List<MulInstruction> _products = [];

        public IReadOnlyList<MulInstruction> Products => _products;

        public int RegisterCount => variableCount + _products.Count;

        /// <summary>The register holding the monomial, or −1 for the constant monomial.</summary>
        public int Ensure(int[] exponents)
        {
            var degree = 0;
            var single = -1;
            for (var v = 0; v < exponents.Length; v++)
            {
                degree += exponents[v];
                if (exponents[v] > 0)
                {
                    single = v;
                }
            }

            if (degree == 0)
            {
                return -1;
            }

            if (degree == 1)
            {
                return single;
            }

            var key = new MonomialKey(exponents);
            if (_registerOf.TryGetValue(key, out var existing))
            {
                return existing;
            }

            int left;
            int right;
            var reuse = FindReusableFactor(exponents);
            if (reuse >= 0)
            {
                var rest = (int[])exponents.Clone();
                rest[reuse]--;
                left = Ensure(rest);
                right = reuse;
            }
            else if (AllEven(exponents))
            {
                // x^(2a) = (x^a)²: halves the chain length for high powers.
                var half = exponents.Select(e => e / 2).ToArray();
                left = Ensure(half);
                right = left;
            }
            else
            {
                var largest = 0;
                for (var v = 1; v < exponents.Length; v++)
                {
                    if (exponents[v] > exponents[largest])
                    {
                        largest = v;
                    }
                }

                var rest = (int[])exponents.Clone();
                rest[largest]--;
                left = Ensure(rest);
                right = largest;
            }

            var register = variableCount + _products.Count;
            _products.Add(new MulInstruction(register, left, right));
            _registerOf[key] = register;
            return register;
        }

        /// <summary>A variable v such that monomial / x_v is already built (or is a single variable).</summary>
        private int FindReusableFactor(int[] exponents)
        {
            for (var v = 0; v < exponents.Length; v++)
            {
                if (exponents[v] == 0)
                {
                    continue;
                }

                exponents[v]--;
                var degree = exponents.Sum();
                var found = degree == 1 || _registerOf.ContainsKey(new MonomialKey(exponents));
                exponents[v]++;
                if (found)
                {
                    return v;
                }
            }

            return -1;
        }

        private static bool AllEven(int[] exponents)
        {
            foreach (var e in exponents)
            {
                if (e % 2 != 0)
                {
                    return false;
                }
            }

            return true;
        }
    }
}

namespace FiberWorkers.Algebra.Evaluation;

/// <summary>Register[Target] = Register[Left] · Register[Right] (complex).</summary>
internal readonly record struct MulInstruction(int Target, int Left, int Right);

/// <summary>Output[Target] = Constant + Σ Terms[TermStart .. TermStart + TermCount).</summary>
internal readonly record struct LinearOutput(int Target, int TermStart, int TermCount, double Constant);

/// <summary>One term Coefficient · Register[Register] of a linear output.</summary>
internal readonly record struct LinearTerm(int Register, double Coefficient);

/// <summary>Real linear combinations of registers written to one output array (F, ∂F/∂x or ∂F/∂p).</summary>
internal sealed class OutputBlock(LinearOutput[] outputs, LinearTerm[] terms, int length)
{
    public LinearOutput[] Outputs { get; } = outputs;

    public LinearTerm[] Terms { get; } = terms;

    /// <summary>Length of the destination array (n, n·n or n·m).</summary>
    public int Length { get; } = length;
}

/// <summary>
/// A straight-line program: products that build the needed monomials (shared across equations and
/// derivatives), then real linear combinations of them for each output.
/// </summary>
internal sealed class EvaluationProgram(MulInstruction[] products, OutputBlock values, OutputBlock? jacobian, OutputBlock? parameterJacobian)
{
    public MulInstruction[] Products { get; } = products;

    public OutputBlock Values { get; } = values;

    public OutputBlock? Jacobian { get; } = jacobian;

    public OutputBlock? ParameterJacobian { get; } = parameterJacobian;
}

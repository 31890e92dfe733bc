using System.Numerics;

namespace FiberWorkers.Algebra.Parsing;

/// <summary>A node of a parsed equation; <see cref="Column"/> is 1-based in the equation text.</summary>
internal abstract record ExpressionNode(int Column)
{
    /// <summary>Direct (tree-walking) evaluation, the reference that compiled evaluation is tested against.</summary>
    public abstract Complex Evaluate(Func<string, Complex> valueOf);
}

internal sealed record NumberNode(int Column, double Value, string Text) : ExpressionNode(Column)
{
    public override Complex Evaluate(Func<string, Complex> valueOf) => Value;
}

internal sealed record NameNode(int Column, string Name) : ExpressionNode(Column)
{
    public override Complex Evaluate(Func<string, Complex> valueOf) => valueOf(Name);
}

internal sealed record NegateNode(int Column, ExpressionNode Operand) : ExpressionNode(Column)
{
    public override Complex Evaluate(Func<string, Complex> valueOf) => -Operand.Evaluate(valueOf);
}

internal enum BinaryOperator
{
    Add,
    Subtract,
    Multiply,
    Divide,
}

internal sealed record BinaryNode(int Column, BinaryOperator Operator, ExpressionNode Left, ExpressionNode Right)
    : ExpressionNode(Column)
{
    public override Complex Evaluate(Func<string, Complex> valueOf)
    {
        var left = Left.Evaluate(valueOf);
        var right = Right.Evaluate(valueOf);
        return Operator switch
        {
            BinaryOperator.Add => left + right,
            BinaryOperator.Subtract => left - right,
            BinaryOperator.Multiply => left * right,
            _ => left / right,
        };
    }
}

internal sealed record PowerNode(int Column, ExpressionNode Base, int Exponent) : ExpressionNode(Column)
{
    public override Complex Evaluate(Func<string, Complex> valueOf)
    {
        var value = Base.Evaluate(valueOf);
        var result = Complex.One;
        for (var i = 0; i < Exponent; i++)
        {
            result *= value;
        }

        return result;
    }
}

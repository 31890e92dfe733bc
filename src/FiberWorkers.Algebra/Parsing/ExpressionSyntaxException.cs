namespace FiberWorkers.Algebra.Parsing;

/// <summary>A problem at a column of one equation; the family reader adds the file and equation number.</summary>
internal sealed class ExpressionSyntaxException(int column, string message) : Exception(message)
{
    /// <summary>1-based column in the equation text.</summary>
    public int Column { get; } = column;
}

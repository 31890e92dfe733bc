namespace FiberWorkers.Algebra.Families;

/// <summary>
/// Raised when external input (a family file, a command-line value, a request field) is invalid.
/// The message names the source and the place, e.g. <c>family.json: equation 2, column 14: ...</c>.
/// </summary>
public class InputException : Exception
{
    /// <summary>Creates an input error from one or more located problems.</summary>
    public InputException(IReadOnlyList<InputProblem> problems)
        : base(string.Join(Environment.NewLine, problems.Select(p => p.ToString())))
    {
        ArgumentNullException.ThrowIfNull(problems);
        ArgumentOutOfRangeException.ThrowIfZero(problems.Count);
        Problems = problems;
    }

    /// <summary>Creates an input error with a single problem.</summary>
    public InputException(string source, string location, string message)
        : this([new InputProblem(source, location, message)])
    {
    }

    /// <summary>The problems found, in the order they occur in the input.</summary>
    public IReadOnlyList<InputProblem> Problems { get; }
}

/// <summary>One problem in an input: where (source and location inside it) and what.</summary>
/// <param name="Source">The file name or other origin, e.g. <c>family.json</c> or <c>--at</c>.</param>
/// <param name="Location">The place inside the source, e.g. <c>equation 2, column 14</c>; may be empty.</param>
/// <param name="Message">What is wrong, with the offending value.</param>
public sealed record InputProblem(string Source, string Location, string Message)
{
    /// <inheritdoc />
    public override string ToString() =>
        string.IsNullOrEmpty(Location) ? $"{Source}: {Message}" : $"{Source}: {Location}: {Message}";
}

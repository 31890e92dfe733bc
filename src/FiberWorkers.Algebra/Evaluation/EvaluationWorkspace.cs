using System.Numerics;

namespace FiberWorkers.Algebra.Evaluation;

/// <summary>
/// Scratch registers for one <see cref="CompiledSystem"/>. Not thread-safe: use one workspace per thread.
/// </summary>
public sealed class EvaluationWorkspace
{
    internal EvaluationWorkspace(CompiledSystem owner, int registerCount)
    {
        Owner = owner;
        Registers = new Complex[registerCount];
    }

    internal CompiledSystem Owner { get; }

    internal Complex[] Registers { get; }
}

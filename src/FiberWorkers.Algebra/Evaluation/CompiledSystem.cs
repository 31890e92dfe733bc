using System.Numerics;
using System.Runtime.CompilerServices;
using System.Runtime.InteropServices;
using FiberWorkers.Algebra.Polynomials;

namespace FiberWorkers.Algebra.Evaluation;

/// <summary>
/// Evaluates F(x; p), ∂F/∂x (row-major, entry [i·n + j] = ∂f_i/∂x_j) and ∂F/∂p (row-major n×m) at complex
/// x and p in double precision. Calls allocate nothing; the caller owns the workspace (one per thread).
/// </summary>
public sealed class CompiledSystem
{
    private readonly EvaluationProgram _values;
    private readonly EvaluationProgram _jacobian;
    private readonly EvaluationProgram _full;
    private readonly int _registerCount;

    internal CompiledSystem(
        PolynomialSystem system, int registerCount, EvaluationProgram values, EvaluationProgram jacobian, EvaluationProgram full)
    {
        System = system;
        _registerCount = registerCount;
        _values = values;
        _jacobian = jacobian;
        _full = full;

        // The directional derivative adds each ∂f_i/∂p_k entry into row i with weight direction[k]; the (i, k) of every
        // entry is fixed, so it is split here once instead of by an integer division per entry and call.
        var outputs = full.ParameterJacobian?.Outputs ?? [];
        var m = Math.Max(1, system.ParameterCount);
        _alongEquation = [.. outputs.Select(o => o.Target / m)];
        _alongParameter = [.. outputs.Select(o => o.Target % m)];
    }

    private readonly int[] _alongEquation;
    private readonly int[] _alongParameter;

    /// <summary>The system this evaluator was compiled from.</summary>
    public PolynomialSystem System { get; }

    /// <summary>n, the number of unknowns.</summary>
    public int UnknownCount => System.UnknownCount;

    /// <summary>m, the number of parameters.</summary>
    public int ParameterCount => System.ParameterCount;

    /// <summary>Number of equations (n for a square system).</summary>
    public int EquationCount => System.Equations.Count;

    /// <summary>Complex products in the program for F, ∂F/∂x and ∂F/∂p together.</summary>
    public int ProductCount => _full.Products.Length;

    /// <summary>Real-coefficient multiply-adds in the program for F, ∂F/∂x and ∂F/∂p together.</summary>
    public int TermCount => _full.Values.Terms.Length + _full.Jacobian!.Terms.Length + _full.ParameterJacobian!.Terms.Length;

    /// <summary>Creates scratch space for this evaluator; use one per thread.</summary>
    public EvaluationWorkspace CreateWorkspace() => new(this, _registerCount);

    /// <summary>Evaluates F(x; p) into <paramref name="values"/> (length = equation count).</summary>
    public void Evaluate(ReadOnlySpan<Complex> x, ReadOnlySpan<Complex> p, Span<Complex> values, EvaluationWorkspace workspace)
    {
        var registers = Load(x, p, workspace, _values);
        Write(_values.Values, registers, values);
    }

    /// <summary>Evaluates F(x; p) and ∂F/∂x (row-major, equation count × n).</summary>
    public void Evaluate(
        ReadOnlySpan<Complex> x, ReadOnlySpan<Complex> p, Span<Complex> values, Span<Complex> jacobian, EvaluationWorkspace workspace)
    {
        var registers = Load(x, p, workspace, _jacobian);
        Write(_jacobian.Values, registers, values);
        WriteSparse(_jacobian.Jacobian!, registers, jacobian);
    }

    /// <summary>Evaluates F(x; p), ∂F/∂x (equation count × n) and ∂F/∂p (equation count × m), all row-major.</summary>
    public void Evaluate(
        ReadOnlySpan<Complex> x,
        ReadOnlySpan<Complex> p,
        Span<Complex> values,
        Span<Complex> jacobian,
        Span<Complex> parameterJacobian,
        EvaluationWorkspace workspace)
    {
        var registers = Load(x, p, workspace, _full);
        Write(_full.Values, registers, values);
        WriteSparse(_full.Jacobian!, registers, jacobian);
        WriteSparse(_full.ParameterJacobian!, registers, parameterJacobian);
    }

    /// <summary>
    /// Evaluates F(x; p), ∂F/∂x, and the directional derivative (∂F/∂p)·<paramref name="direction"/>
    /// without forming ∂F/∂p: what a parameter homotopy p(t) = p0 + t·direction needs for ∂H/∂t.
    /// </summary>
    public void EvaluateAlong(
        ReadOnlySpan<Complex> x,
        ReadOnlySpan<Complex> p,
        ReadOnlySpan<Complex> direction,
        Span<Complex> values,
        Span<Complex> jacobian,
        Span<Complex> directionalDerivative,
        EvaluationWorkspace workspace)
    {
        if (direction.Length != ParameterCount)
        {
            throw new ArgumentException($"direction has {direction.Length} entries, expected {ParameterCount}", nameof(direction));
        }

        var registers = Load(x, p, workspace, _full);
        Write(_full.Values, registers, values);
        WriteSparse(_full.Jacobian!, registers, jacobian);

        var block = _full.ParameterJacobian!;
        if (directionalDerivative.Length != EquationCount)
        {
            throw new ArgumentException(
                $"destination has {directionalDerivative.Length} entries, expected {EquationCount}", nameof(directionalDerivative));
        }

        directionalDerivative.Clear();
        var terms = block.Terms;
        var outputs = block.Outputs.AsSpan();
        for (var o = 0; o < outputs.Length; o++)
        {
            var entry = Combine(in outputs[o], terms, registers);
            directionalDerivative[_alongEquation[o]] += entry * direction[_alongParameter[o]];
        }
    }

    private Span<Complex> Load(ReadOnlySpan<Complex> x, ReadOnlySpan<Complex> p, EvaluationWorkspace workspace, EvaluationProgram program)
    {
        ArgumentNullException.ThrowIfNull(workspace);
        if (!ReferenceEquals(workspace.Owner, this))
        {
            throw new ArgumentException("the workspace belongs to another compiled system", nameof(workspace));
        }

        if (x.Length != UnknownCount)
        {
            throw new ArgumentException($"x has {x.Length} entries, expected {UnknownCount}", nameof(x));
        }

        if (p.Length != ParameterCount)
        {
            throw new ArgumentException($"p has {p.Length} entries, expected {ParameterCount}", nameof(p));
        }

        var registers = workspace.Registers.AsSpan();
        x.CopyTo(registers);
        p.CopyTo(registers[UnknownCount..]);

        // Indices were produced by the compiler and are in range by construction; unchecked access keeps
        // the step loop free of bounds checks (this is the innermost loop of path tracking).
        ref var first = ref MemoryMarshal.GetReference(registers);
        foreach (ref readonly var product in program.Products.AsSpan())
        {
            Unsafe.Add(ref first, product.Target) = Unsafe.Add(ref first, product.Left) * Unsafe.Add(ref first, product.Right);
        }

        return registers;
    }

    private static void Write(OutputBlock block, ReadOnlySpan<Complex> registers, Span<Complex> destination)
    {
        if (destination.Length != block.Length)
        {
            throw new ArgumentException($"destination has {destination.Length} entries, expected {block.Length}", nameof(destination));
        }

        var terms = block.Terms;
        foreach (ref readonly var output in block.Outputs.AsSpan())
        {
            destination[output.Target] = Combine(in output, terms, registers);
        }
    }

    private static void WriteSparse(OutputBlock block, ReadOnlySpan<Complex> registers, Span<Complex> destination)
    {
        if (destination.Length != block.Length)
        {
            throw new ArgumentException($"destination has {destination.Length} entries, expected {block.Length}", nameof(destination));
        }

        destination.Clear();
        var terms = block.Terms;
        foreach (ref readonly var output in block.Outputs.AsSpan())
        {
            destination[output.Target] = Combine(in output, terms, registers);
        }
    }

    [MethodImpl(MethodImplOptions.AggressiveInlining)]
    private static Complex Combine(in LinearOutput output, LinearTerm[] terms, ReadOnlySpan<Complex> registers)
    {
        var re = output.Constant;
        var im = 0.0;
        ref readonly var first = ref MemoryMarshal.GetReference(registers);
        foreach (ref readonly var term in terms.AsSpan(output.TermStart, output.TermCount))
        {
            var value = Unsafe.Add(ref Unsafe.AsRef(in first), term.Register);
            re += term.Coefficient * value.Real;
            im += term.Coefficient * value.Imaginary;
        }

        return new Complex(re, im);
    }
}

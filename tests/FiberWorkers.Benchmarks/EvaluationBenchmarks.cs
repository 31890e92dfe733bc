using System.Numerics;
using BenchmarkDotNet.Attributes;
using FiberWorkers.Algebra.Evaluation;
using FiberWorkers.Algebra.LinearAlgebra;
using FiberWorkers.Testing;

namespace FiberWorkers.Benchmarks;

/// <summary>
/// One evaluation of F and ∂F/∂x of the four-bus microgrid at a random complex point (issue target: under
/// 150 ns on this machine), and the same plus a 6×6 complex LU solve, the unit of work of a Newton step.
/// </summary>
[MemoryDiagnoser]
public class EvaluationBenchmarks
{
    private CompiledSystem _system = null!;
    private EvaluationWorkspace _workspace = null!;
    private Complex[] _x = null!;
    private Complex[] _p = null!;
    private Complex[] _values = null!;
    private Complex[] _jacobian = null!;
    private Complex[] _parameterJacobian = null!;
    private int[] _pivots = null!;

    [GlobalSetup]
    public void Setup()
    {
        _system = TestFamilies.Example("microgrid4").System.Compile();
        _workspace = _system.CreateWorkspace();
        var random = new Random(2024);
        _x = [.. Enumerable.Range(0, 6).Select(_ => new Complex(random.NextDouble() - 0.5, random.NextDouble() - 0.5))];
        _p = [.. Enumerable.Range(0, 3).Select(_ => new Complex(random.NextDouble() - 0.5, random.NextDouble() - 0.5))];
        _values = new Complex[6];
        _jacobian = new Complex[36];
        _parameterJacobian = new Complex[18];
        _pivots = new int[6];
    }

    [Benchmark(Description = "F only")]
    public Complex Values()
    {
        _system.Evaluate(_x, _p, _values, _workspace);
        return _values[0];
    }

    [Benchmark(Baseline = true, Description = "F and dF/dx")]
    public Complex ValuesAndJacobian()
    {
        _system.Evaluate(_x, _p, _values, _jacobian, _workspace);
        return _jacobian[0];
    }

    [Benchmark(Description = "F, dF/dx and dF/dp")]
    public Complex ValuesAndBothJacobians()
    {
        _system.Evaluate(_x, _p, _values, _jacobian, _parameterJacobian, _workspace);
        return _parameterJacobian[0];
    }

    [Benchmark(Description = "F, dF/dx and a 6x6 LU solve")]
    public Complex NewtonStep()
    {
        _system.Evaluate(_x, _p, _values, _jacobian, _workspace);
        ComplexLu.Factor(_jacobian, 6, _pivots);
        ComplexLu.Solve(_jacobian, 6, _pivots, _values);
        return _values[0];
    }
}

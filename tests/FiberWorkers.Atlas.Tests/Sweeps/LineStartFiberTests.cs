using FiberWorkers.Atlas.Sweeps;
using FiberWorkers.Atlas.Tests.Support;

namespace FiberWorkers.Atlas.Tests.Sweeps;

/// <summary>
/// The line families' start fibers sit at the sweep's fixed charts, so line solves move only the line (a, d), and
/// moving them there loses no solution that a real line can reach.
/// </summary>
public sealed class LineStartFiberTests
{
    [Theory]
    [InlineData("microgrid3", new[] { 2, 2 })]
    [InlineData("two-link-arm", new[] { 2, 2 })]
    [InlineData("reaction-switch", new[] { 2, 2 })]
    public void Fold_and_passage_start_fibers_have_the_fixed_charts_and_solve_their_systems(string example, int[] divisions)
    {
        var context = SweepContexts.Example(example, new SweepOptions { Divisions = divisions, LinesPerTile = 3, Seed = 61 });
        var m = context.Family.Parameters.Count;
        var folds = context.FoldStart;
        Assert.True(folds.RootCount > 0, $"{example}: the fold family has no start solutions");
        Assert.Equal([.. context.Lines.Chart, .. context.Lines.Normal], folds.Parameters[(2 * m)..]);
        if (context.PassageStart.RootCount > 0)
        {
            Assert.Equal(context.Lines.Chart, context.PassageStart.Parameters[(2 * m)..]);
        }

        // Each kept solution solves the fold system at the start fiber's own point (residual at rounding level).
        var compiled = context.Lines.Folds.Compile();
        var workspace = compiled.CreateWorkspace();
        var values = new System.Numerics.Complex[compiled.EquationCount];
        foreach (var solution in folds.Solutions)
        {
            compiled.Evaluate(solution, folds.Parameters, values, workspace);
            var size = 1 + solution.Max(v => v.Magnitude);
            Assert.True(values.Max(v => v.Magnitude) <= 1e-9 * size * size, $"{example}: a moved fold start solution does not solve the system");
        }

        Assert.Contains("moved onto the sweep's charts", folds.Provenance.Note, StringComparison.Ordinal);
    }
}

using FiberWorkers.Contracts.V1;

namespace FiberWorkers.Algebra.Families;

/// <summary>
/// Well-known benchmark systems, generated as families: Katsura-n (Katsura 1990) and cyclic-n roots
/// (Björck &amp; Fröberg 1991). Used by benchmarks and tests.
/// </summary>
public static class BenchmarkFamilies
{
    /// <summary>
    /// Katsura-n: unknowns u0..un, Σ_{i=−n..n} u_i = 1 and Σ_{i=−n..n} u_i·u_{m−i} = u_m for m = 0..n−1, with
    /// u_{−i} = u_i and indices beyond n dropped. 2ⁿ solutions, all finite and nonsingular (the Bézout number).
    /// </summary>
    public static FamilyDefinition Katsura(int n)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(n, 1);
        static string U(int i) => $"u{Math.Abs(i)}";
        var family = new Family { Family_ = $"katsura-{n}", Description = "Katsura (1990) benchmark system" };
        for (var i = 0; i <= n; i++)
        {
            family.Unknowns.Add($"u{i}");
        }

        family.Equations.Add(string.Join(" + ", Enumerable.Range(0, n + 1).Select(i => i == 0 ? "u0" : $"2*u{i}")) + " - 1");
        for (var m = 0; m < n; m++)
        {
            var terms = new List<string>();
            for (var i = -n; i <= n; i++)
            {
                var j = m - i;
                if (Math.Abs(j) <= n)
                {
                    terms.Add($"{U(i)}*{U(j)}");
                }
            }

            family.Equations.Add($"{string.Join(" + ", terms)} - {U(m)}");
        }

        return FamilyReader.FromMessage(family, family.Family_);
    }

    /// <summary>
    /// Cyclic-n roots: Σ_i Π_{k&lt;j} z_{i+k} = 0 for j = 1..n−1 and Π z_i = 1 (70, 156 and 924 isolated solutions
    /// for n = 5, 6, 7). With <paramref name="withConstantParameters"/> each equation gets a parameter q_i added to
    /// its constant term (box [−1, 1]), the generic perturbation that monodromy uses.
    /// </summary>
    public static FamilyDefinition Cyclic(int n, bool withConstantParameters = false)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(n, 2);
        var family = new Family { Family_ = $"cyclic-{n}", Description = "cyclic n-roots benchmark system" };
        var unknowns = Enumerable.Range(1, n).Select(i => $"z{i}").ToArray();
        family.Unknowns.Add(unknowns);
        for (var j = 1; j < n; j++)
        {
            var terms = Enumerable.Range(0, n).Select(i => string.Join("*", Enumerable.Range(0, j).Select(k => unknowns[(i + k) % n])));
            family.Equations.Add(string.Join(" + ", terms));
        }

        family.Equations.Add(string.Join("*", unknowns) + " - 1");
        if (withConstantParameters)
        {
            for (var i = 0; i < n; i++)
            {
                family.Equations[i] += $" + q{i + 1}";
                family.Parameters.Add(new ParameterRange { Name = $"q{i + 1}", Low = -1, High = 1 });
            }
        }

        return FamilyReader.FromMessage(family, family.Family_);
    }
}

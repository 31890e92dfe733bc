using System.Globalization;
using System.Security.Cryptography;
using System.Text;
using FiberWorkers.Algebra.Polynomials;
using FiberWorkers.Contracts.V1;

namespace FiberWorkers.Algebra.Families;

/// <summary>
/// A validated family: names, the parameter box, constants, the equations as text and as expanded
/// polynomials over unknowns ++ parameters, and a content hash of what matters mathematically.
/// </summary>
public sealed class FamilyDefinition
{
    internal FamilyDefinition(
        string source,
        Family message,
        IReadOnlyList<ParameterBox> parameters,
        IReadOnlyDictionary<string, double> constants,
        PolynomialSystem system)
    {
        Source = source;
        Message = message;
        Parameters = parameters;
        Constants = constants;
        System = system;
        ContentHash = ComputeContentHash(system, parameters, message.HasRootCount ? message.RootCount : null);
    }

    /// <summary>Where the family came from (file name, example name, request).</summary>
    public string Source { get; }

    /// <summary>The proto form, as read.</summary>
    public Family Message { get; }

    /// <summary>The display name ("family" field).</summary>
    public string Name => Message.Family_;

    /// <summary>Free text, possibly empty.</summary>
    public string Description => Message.Description;

    /// <summary>Names of the unknowns.</summary>
    public IReadOnlyList<string> Unknowns => System.Unknowns;

    /// <summary>Parameters with their box.</summary>
    public IReadOnlyList<ParameterBox> Parameters { get; }

    /// <summary>Named constants, in file order.</summary>
    public IReadOnlyDictionary<string, double> Constants { get; }

    /// <summary>The equations as written.</summary>
    public IReadOnlyList<string> EquationTexts => Message.Equations;

    /// <summary>The user's expected generic root count, if given.</summary>
    public int? RootCount => Message.HasRootCount ? Message.RootCount : null;

    /// <summary>The expanded system F(x; p).</summary>
    public PolynomialSystem System { get; }

    /// <summary>
    /// SHA-256 (hex) of the canonical expanded system, the parameter box and the root-count hint; independent of
    /// the display name, description, spelling of the equations and of constants' names.
    /// </summary>
    public string ContentHash { get; }

    private static string ComputeContentHash(PolynomialSystem system, IReadOnlyList<ParameterBox> parameters, int? rootCount)
    {
        var text = new StringBuilder();
        text.Append("fiberworkers-family-v1\n");
        text.Append("unknowns:").AppendJoin(',', system.Unknowns).Append('\n');
        foreach (var parameter in parameters)
        {
            text.Append(CultureInfo.InvariantCulture, $"parameter:{parameter.Name}[{parameter.Low:R},{parameter.High:R}]\n");
        }

        text.Append(CultureInfo.InvariantCulture, $"rootCount:{rootCount?.ToString(CultureInfo.InvariantCulture) ?? "-"}\n");
        for (var i = 0; i < system.Equations.Count; i++)
        {
            var equation = system.Equations[i];
            text.Append(CultureInfo.InvariantCulture, $"equation {i}:");
            for (var t = 0; t < equation.TermCount; t++)
            {
                text.Append(CultureInfo.InvariantCulture, $" {equation.CoefficientOf(t):R}");
                foreach (var e in equation.ExponentsOf(t))
                {
                    text.Append(CultureInfo.InvariantCulture, $",{e}");
                }
            }

            text.Append('\n');
        }

        return Convert.ToHexStringLower(SHA256.HashData(Encoding.UTF8.GetBytes(text.ToString())));
    }
}

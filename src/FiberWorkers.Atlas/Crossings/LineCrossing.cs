using FiberWorkers.Contracts.V1;

namespace FiberWorkers.Atlas.Crossings;

/// <summary>A real crossing found on a line segment.</summary>
/// <param name="S">Position on the line.</param>
/// <param name="Kind">Fold, fold at infinity, or passage through infinity.</param>
/// <param name="Solution">The singular solution (affine) or the direction at infinity.</param>
internal sealed record LineCrossing(double S, CrossingKind Kind, double[] Solution)
{
    /// <summary>True for crossings where the real count can change (folds, finite or at infinity).</summary>
    public bool IsBoundary => Kind is CrossingKind.Fold or CrossingKind.FoldAtInfinity;
}

using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Contracts.V1;

namespace FiberWorkers.Atlas.Learning;

/// <summary>
/// Labeled samples in box-normalized coordinates ((p − low) / (high − low) per axis), with their kinds and the
/// samples themselves (real solutions included), as classifiers and studies use them.
/// </summary>
public sealed class SampleSet
{
    private SampleSet(IReadOnlyList<ParameterBox> box, IReadOnlyList<Sample> samples, IReadOnlyList<string> tiles)
    {
        Box = box;
        Samples = samples;
        Tiles = tiles;
        Dimension = box.Count;
        Points = new double[samples.Count * Dimension];
        Labels = new int[samples.Count];
        for (var i = 0; i < samples.Count; i++)
        {
            Normalize([.. samples[i].Point], Points.AsSpan(i * Dimension, Dimension));
            Labels[i] = samples[i].Label;
        }
    }

    /// <summary>The parameter box.</summary>
    public IReadOnlyList<ParameterBox> Box { get; }

    /// <summary>Number of parameters.</summary>
    public int Dimension { get; }

    /// <summary>The samples, in atlas order.</summary>
    public IReadOnlyList<Sample> Samples { get; }

    /// <summary>Each sample's tile key.</summary>
    public IReadOnlyList<string> Tiles { get; }

    /// <summary>Normalized coordinates, row-major.</summary>
    public double[] Points { get; }

    /// <summary>Labels (real counts).</summary>
    public int[] Labels { get; }

    /// <summary>Number of samples.</summary>
    public int Count => Labels.Length;

    /// <summary>All samples of an atlas version.</summary>
    public static SampleSet From(AtlasSnapshot snapshot)
    {
        ArgumentNullException.ThrowIfNull(snapshot);
        return new SampleSet(snapshot.Family.Parameters, [.. snapshot.Samples.Select(s => s.Sample)], [.. snapshot.Samples.Select(s => s.Tile)]);
    }

    /// <summary>A subset, by sample index.</summary>
    public SampleSet Subset(IEnumerable<int> indices)
    {
        var chosen = indices.ToArray();
        return new SampleSet(Box, [.. chosen.Select(i => Samples[i])], [.. chosen.Select(i => Tiles[i])]);
    }

    /// <summary>
    /// Splits the samples by line: whole lines go to the held-out part, a seeded share of them, so that no sample is
    /// judged against its own twin across a crossing. Returns sample indices, each part in atlas order.
    /// </summary>
    public (int[] Kept, int[] HeldOut) SplitByLine(double heldOutShare, ulong seed)
    {
        var lines = Enumerable.Range(0, Count).Select(i => (Tiles[i], Samples[i].Line)).Distinct().ToArray();
        var random = new Solving.Randomness.SeededRandom(Solving.Randomness.SeededRandom.Derive(seed, "line-split"));
        for (var i = lines.Length - 1; i > 0; i--)
        {
            var j = random.NextInt(i + 1);
            (lines[i], lines[j]) = (lines[j], lines[i]);
        }

        var heldOutCount = Math.Clamp((int)Math.Round(lines.Length * heldOutShare), 1, Math.Max(1, lines.Length - 1));
        var heldOut = lines.Take(heldOutCount).ToHashSet();
        var held = Enumerable.Range(0, Count).Where(i => heldOut.Contains((Tiles[i], Samples[i].Line))).ToArray();
        var kept = Enumerable.Range(0, Count).Where(i => !heldOut.Contains((Tiles[i], Samples[i].Line))).ToArray();
        return (kept, held);
    }

    /// <summary>Maps a parameter point into normalized coordinates.</summary>
    public void Normalize(ReadOnlySpan<double> point, Span<double> normalized)
    {
        for (var k = 0; k < Dimension; k++)
        {
            normalized[k] = (point[k] - Box[k].Low) / Box[k].Width;
        }
    }
}

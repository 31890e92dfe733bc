using System.Globalization;
using FiberWorkers.Algebra.Families;

namespace FiberWorkers.Atlas.Tiles;

/// <summary>
/// A tile of the parameter box: a refinement level and integer coordinates at that level. Level 0 is the sweep's
/// grid (divisions per axis); each level halves every axis, so tile (l, i) has the children (l + 1, 2i + b) for
/// b ∈ {0, 1}^m. Written as <c>L{level}:{i₁},{i₂},…</c>.
/// </summary>
public readonly record struct TileKey(int Level, int[] Coordinates) : IComparable<TileKey>
{
    /// <summary>Parses <c>L2:5,3</c>; throws <see cref="FormatException"/> on anything else.</summary>
    public static TileKey Parse(string text)
    {
        ArgumentNullException.ThrowIfNull(text);
        var colon = text.IndexOf(':', StringComparison.Ordinal);
        if (text.Length < 4 || text[0] != 'L' || colon < 2
            || !TryParseCanonical(text.AsSpan(1, colon - 1), out var level)
            || level > 30)
        {
            throw new FormatException($"'{text}' is not a tile key (expected L<level>:<i>,<j>,...)");
        }

        var parts = text[(colon + 1)..].Split(',');
        var coordinates = new int[parts.Length];
        for (var k = 0; k < parts.Length; k++)
        {
            if (!TryParseCanonical(parts[k], out coordinates[k]))
            {
                throw new FormatException($"'{text}' is not a tile key (coordinate {k + 1} is not a non-negative integer without leading zeros)");
            }
        }

        return new TileKey(level, coordinates);
    }

    /// <summary>
    /// A non-negative integer as <see cref="ToString"/> writes it: a key's text is its identity in the store, so
    /// "L0:01" must not be a second name for "L0:1".
    /// </summary>
    private static bool TryParseCanonical(ReadOnlySpan<char> digits, out int value)
    {
        value = 0;
        return !(digits.Length > 1 && digits[0] == '0')
            && int.TryParse(digits, NumberStyles.None, CultureInfo.InvariantCulture, out value);
    }

    /// <summary>The 2^m children one level down.</summary>
    public IEnumerable<TileKey> Children()
    {
        var m = Coordinates.Length;
        for (var mask = 0; mask < (1 << m); mask++)
        {
            var child = new int[m];
            for (var k = 0; k < m; k++)
            {
                child[k] = (2 * Coordinates[k]) + ((mask >> k) & 1);
            }

            yield return new TileKey(Level + 1, child);
        }
    }

    /// <summary>The tile's bounds in the box, given the level-0 divisions per axis.</summary>
    public (double[] Low, double[] High) Bounds(IReadOnlyList<ParameterBox> box, IReadOnlyList<int> divisions)
    {
        var m = Coordinates.Length;
        var low = new double[m];
        var high = new double[m];
        for (var k = 0; k < m; k++)
        {
            var cells = (double)divisions[k] * (1L << Level);
            low[k] = box[k].Low + (box[k].Width * Coordinates[k] / cells);

            // Low + Width·cells/cells can miss High by an ulp; the grid's outer edges are the box's own.
            high[k] = Coordinates[k] + 1 == cells ? box[k].High : box[k].Low + (box[k].Width * (Coordinates[k] + 1) / cells);
        }

        return (low, high);
    }

    /// <summary>The level-0 tile this one lies in (itself at level 0).</summary>
    public TileKey Root()
    {
        var level = Level;
        return level == 0 ? this : new TileKey(0, [.. Coordinates.Select(c => c >> level)]);
    }

    /// <summary>
    /// The level-0 tile containing <paramref name="point"/>; points outside the box go to the nearest tile (and points
    /// on an inner edge to the tile above it). Throws when the point's length differs from the box's.
    /// </summary>
    public static TileKey Containing(ReadOnlySpan<double> point, IReadOnlyList<ParameterBox> box, IReadOnlyList<int> divisions)
    {
        ArgumentNullException.ThrowIfNull(box);
        ArgumentNullException.ThrowIfNull(divisions);
        if (point.Length != box.Count || divisions.Count != box.Count)
        {
            throw new ArgumentException($"a point of {point.Length} values for a box of {box.Count} parameters and {divisions.Count} divisions");
        }

        var coordinates = new int[box.Count];
        for (var k = 0; k < box.Count; k++)
        {
            var cell = Math.Floor((point[k] - box[k].Low) / box[k].Width * divisions[k]);
            coordinates[k] = double.IsNaN(cell) ? 0 : (int)Math.Clamp(cell, 0, divisions[k] - 1);
        }

        return new TileKey(0, coordinates);
    }

    /// <summary>True when the coordinates fit the grid at this level.</summary>
    public bool FitsIn(IReadOnlyList<int> divisions)
    {
        if (Coordinates.Length != divisions.Count)
        {
            return false;
        }

        for (var k = 0; k < Coordinates.Length; k++)
        {
            if (Coordinates[k] < 0 || Coordinates[k] >= (long)divisions[k] << Level)
            {
                return false;
            }
        }

        return true;
    }

    /// <inheritdoc />
    public override string ToString() =>
        string.Create(CultureInfo.InvariantCulture, $"L{Level}:{string.Join(',', Coordinates)}");

    /// <inheritdoc />
    public bool Equals(TileKey other) => Level == other.Level && Coordinates.AsSpan().SequenceEqual(other.Coordinates);

    /// <inheritdoc />
    public override int GetHashCode() => ToString().GetHashCode(StringComparison.Ordinal);

    /// <summary>Orders by level, then coordinates lexicographically: the order tiles are hashed and stored in.</summary>
    public int CompareTo(TileKey other)
    {
        if (Level != other.Level)
        {
            return Level.CompareTo(other.Level);
        }

        for (var k = 0; k < Math.Min(Coordinates.Length, other.Coordinates.Length); k++)
        {
            if (Coordinates[k] != other.Coordinates[k])
            {
                return Coordinates[k].CompareTo(other.Coordinates[k]);
            }
        }

        return Coordinates.Length.CompareTo(other.Coordinates.Length);
    }
}

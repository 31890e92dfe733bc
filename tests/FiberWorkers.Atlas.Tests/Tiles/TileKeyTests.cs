using CsCheck;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Tests.Support;
using FiberWorkers.Atlas.Tiles;

namespace FiberWorkers.Atlas.Tests.Tiles;

/// <summary>Tile keys: text round trips, children, bounds and order (properties on seeded CsCheck draws).</summary>
public sealed class TileKeyTests
{
    private static readonly Gen<TileKey> Keys =
        from level in Gen.Int[0, 30]
        from coordinates in Gen.Int[0, int.MaxValue].Array[1, 5]
        select new TileKey(level, coordinates);

    /// <summary>A box of 1 to 4 axes, each with its level-0 divisions.</summary>
    private static readonly Gen<(ParameterBox[] Box, int[] Divisions)> Grids =
        Gen.Int[1, 4].SelectMany(axes => Gen.Select(
            Gen.Double[-1e3, 1e3].Array[axes],
            Gen.Double[1e-3, 1e3].Array[axes],
            Gen.Int[1, 12].Array[axes],
            (lows, widths, divisions) => (lows.Select((low, k) => new ParameterBox($"p{k}", low, low + widths[k])).ToArray(), divisions)));

    [Fact]
    public void Format_then_parse_gives_the_same_key_and_parse_then_format_the_same_text()
    {
        foreach (var key in SeededDraws.Take(Keys, 0x7113, 500))
        {
            var text = key.ToString();
            var parsed = TileKey.Parse(text);
            Assert.Equal(key, parsed);
            Assert.Equal(key.GetHashCode(), parsed.GetHashCode());
            Assert.Equal(text, parsed.ToString());
        }

        Assert.Equal("L2:5,3", new TileKey(2, [5, 3]).ToString());
        Assert.Equal(new TileKey(0, [0]), TileKey.Parse("L0:0"));
    }

    [Theory]
    [InlineData("")]
    [InlineData("L")]
    [InlineData("L0")]
    [InlineData("L0:")]
    [InlineData("0:1")]
    [InlineData("l0:1")]
    [InlineData("L:1,2")]
    [InlineData("L-1:0")]
    [InlineData("L31:0")]
    [InlineData("L0:1,")]
    [InlineData("L0:,1")]
    [InlineData("L0:1,,2")]
    [InlineData("L0:-1")]
    [InlineData("L0:+1")]
    [InlineData("L0:1.5")]
    [InlineData("L0: 1")]
    [InlineData("L0:1 ")]
    [InlineData("L0:2147483648")]
    [InlineData("L0:01")] // one tile, one text: leading zeros would make a second name for L0:1
    [InlineData("L01:1")]
    public void Parse_refuses_anything_but_the_canonical_text(string text)
    {
        var error = Assert.Throws<FormatException>(() => TileKey.Parse(text));
        Assert.Contains($"'{text}'", error.Message, StringComparison.Ordinal);
    }

    [Fact]
    public void Children_are_the_two_to_the_m_halves_of_their_parent_one_level_down()
    {
        foreach (var (box, divisions) in SeededDraws.Take(Grids, 0x7114, 200))
        {
            var m = box.Length;
            var random = new Random(divisions.Sum() + m);
            var level = random.Next(0, 6);
            var parent = new TileKey(level, [.. divisions.Select(d => random.Next(0, d << level))]);
            Assert.True(parent.FitsIn(divisions));
            var children = parent.Children().ToList();
            var (low, high) = parent.Bounds(box, divisions);

            Assert.Equal(1 << m, children.Count);
            Assert.Equal(children.Count, children.Distinct().Count());
            var volume = 0.0;
            foreach (var child in children)
            {
                Assert.Equal(level + 1, child.Level);
                Assert.True(child.FitsIn(divisions));
                Assert.Equal(parent.Coordinates, child.Coordinates.Select(c => c / 2));
                var (childLow, childHigh) = child.Bounds(box, divisions);
                var childVolume = 1.0;
                for (var k = 0; k < m; k++)
                {
                    // Each child edge is exactly a parent edge or the parent's midpoint on that axis.
                    var lower = child.Coordinates[k] % 2 == 0;
                    Assert.Equal(lower ? low[k] : childLow[k], childLow[k]);
                    Assert.Equal(lower ? childHigh[k] : high[k], childHigh[k]);
                    Assert.True(childLow[k] < childHigh[k]);
                    childVolume *= (childHigh[k] - childLow[k]) / (high[k] - low[k]);
                }

                volume += childVolume;
            }

            Assert.Equal(1.0, volume, 1e-9);
        }
    }

    [Fact]
    public void Level_zero_tiles_partition_the_box_edge_to_edge()
    {
        foreach (var (box, divisions) in SeededDraws.Take(Grids, 0x7115, 300))
        {
            for (var k = 0; k < box.Length; k++)
            {
                // Walk along axis k with the other coordinates at 0: neighbours share their edge bit for bit, and
                // the outer edges are the box's own.
                double? previousHigh = null;
                for (var i = 0; i < divisions[k]; i++)
                {
                    var coordinates = new int[box.Length];
                    coordinates[k] = i;
                    var (low, high) = new TileKey(0, coordinates).Bounds(box, divisions);
                    Assert.Equal(previousHigh ?? box[k].Low, low[k]);
                    Assert.True(high[k] > low[k]);
                    Assert.Equal(box[k].Width / divisions[k], high[k] - low[k], 1e-9 * box[k].Width);
                    previousHigh = high[k];
                }

                Assert.Equal(box[k].High, previousHigh);
            }
        }
    }

    [Fact]
    public void Keys_outside_the_grid_do_not_fit()
    {
        int[] divisions = [3, 2];
        Assert.True(new TileKey(0, [2, 1]).FitsIn(divisions));
        Assert.False(new TileKey(0, [3, 1]).FitsIn(divisions));
        Assert.False(new TileKey(0, [0, 2]).FitsIn(divisions));
        Assert.False(new TileKey(0, [-1, 0]).FitsIn(divisions));
        Assert.False(new TileKey(0, [0]).FitsIn(divisions));
        Assert.True(new TileKey(2, [11, 7]).FitsIn(divisions));
        Assert.False(new TileKey(2, [12, 7]).FitsIn(divisions));
    }

    [Fact]
    public void Order_is_by_level_then_coordinates_and_agrees_with_equality()
    {
        var keys = SeededDraws.Take(
            from level in Gen.Int[0, 2]
            from coordinates in Gen.Int[0, 3].Array[2]
            select new TileKey(level, coordinates),
            0x7116,
            300);
        foreach (var a in keys.Take(60))
        {
            foreach (var b in keys)
            {
                var order = a.CompareTo(b);
                Assert.Equal(order == 0, a.Equals(b));
                Assert.Equal(-Math.Sign(order), Math.Sign(b.CompareTo(a)));
                if (a.Level != b.Level)
                {
                    Assert.Equal(Math.Sign(a.Level.CompareTo(b.Level)), Math.Sign(order));
                }
            }
        }

        var sorted = keys.Order().ToList();
        for (var i = 1; i < sorted.Count; i++)
        {
            Assert.True(sorted[i - 1].CompareTo(sorted[i]) <= 0);
        }

        Assert.Equal([new TileKey(0, [1, 0]), new TileKey(0, [1, 2]), new TileKey(1, [0, 0])], new[] { new TileKey(1, [0, 0]), new TileKey(0, [1, 2]), new TileKey(0, [1, 0]) }.Order());
    }
}

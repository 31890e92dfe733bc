using FiberWorkers.Algebra.Families;
using FiberWorkers.Atlas.Maps;
using FiberWorkers.Atlas.Tests.Exports;
using FiberWorkers.Testing;

namespace FiberWorkers.Atlas.Tests.Maps;

public sealed class MapRendererTests
{
    // x³ + bx + c has three real roots where 4b³ + 27c² < 0 and one where it is positive (the discriminant).
    private const double ThreeRootB = -2.6;
    private const double ThreeRootC = 0.0;
    private const double OneRootB = 0.5;
    private const double OneRootC = 1.2;

    /// <summary>
    /// Area of {4b³ + 27c² &lt; 0} in [−3, 1] × [−2, 2]: ∫ from −3 to 0 of 4(−b/3)^(3/2) db = 12 · 2/5 = 4.8, over a box
    /// of area 16.
    /// </summary>
    private const double ThreeRootAreaFraction = 4.8 / 16;

    [Fact]
    public void Render_writes_a_valid_png_of_the_requested_size()
    {
        var map = MapRenderer.Render(SmallAtlases.Cubic, new MapOptions { Width = 640, Height = 480 });

        var png = PngReader.Decode(map.Png);
        Assert.Equal(640, png.Width);
        Assert.Equal(480, png.Height);
        Assert.Equal((640, 480), (map.Description.Width, map.Description.Height));
        var (left, top, right, bottom) = map.Description.DataArea;
        Assert.True(left > 0 && top > 0 && right < 640 && bottom < 480 && right - left > 200 && bottom - top > 200, $"data area {map.Description.DataArea}");
    }

    [Fact]
    public void Pixels_in_a_three_root_region_and_a_one_root_region_have_their_legend_colors()
    {
        Assert.True((4 * Math.Pow(ThreeRootB, 3)) + (27 * ThreeRootC * ThreeRootC) < 0);
        Assert.True((4 * Math.Pow(OneRootB, 3)) + (27 * OneRootC * OneRootC) > 0);

        var map = MapRenderer.Render(SmallAtlases.Cubic, new MapOptions { Width = 640, Height = 480 });

        var png = PngReader.Decode(map.Png);
        var three = Dominant(png, map.Description, ThreeRootB, ThreeRootC);
        var one = Dominant(png, map.Description, OneRootB, OneRootC);
        Assert.NotEqual(three, one);
        Assert.Equal(map.Description.Legend.Single(e => e.Label == 3).RegionColor, three);
        Assert.Equal(map.Description.Legend.Single(e => e.Label == 1).RegionColor, one);
    }

    [Fact]
    public void Legend_lists_each_count_with_its_samples_and_an_area_near_the_closed_form()
    {
        var snapshot = SmallAtlases.Cubic;

        var map = MapRenderer.Render(snapshot, new MapOptions { Width = 640, Height = 480 });

        var legend = map.Description.Legend;
        Assert.Equal([1, 3], legend.Select(e => e.Label));
        foreach (var entry in legend)
        {
            Assert.Equal(snapshot.Samples.Count(s => s.Sample.Label == entry.Label), entry.Samples);
        }

        Assert.Equal(1.0, legend.Sum(e => e.AreaFraction), 12);
        Assert.Equal(snapshot.Samples.Count, map.Description.SamplesShown);
        Assert.Equal(snapshot.Crossings.Count, map.Description.CrossingsShown.Values.Sum());
        Assert.Equal("nearest sample", map.Description.Regions);
        Assert.NotEqual(legend[0].RegionColor, legend[1].RegionColor);
        // Nearest-sample regions of a 4x4, 2-line sweep: the cusp region's area within 0.08 of 0.3.
        Assert.InRange(legend.Single(e => e.Label == 3).AreaFraction, ThreeRootAreaFraction - 0.08, ThreeRootAreaFraction + 0.08);
    }

    [Fact]
    public void A_region_labeler_draws_the_background_and_the_discriminant_gives_the_exact_area()
    {
        var map = MapRenderer.Render(SmallAtlases.Cubic, new MapOptions { Width = 640, Height = 480, Regions = new DiscriminantLabeler() });

        Assert.Equal("discriminant", map.Description.Regions);
        // Only grid discretization separates the drawn area from the closed form.
        Assert.Equal(ThreeRootAreaFraction, map.Description.Legend.Single(e => e.Label == 3).AreaFraction, 0.01);
        var png = PngReader.Decode(map.Png);
        Assert.Equal(map.Description.Legend.Single(e => e.Label == 3).RegionColor, Dominant(png, map.Description, ThreeRootB, ThreeRootC));
    }

    [Fact]
    public void A_classifier_sees_box_normalized_coordinates()
    {
        // In normalized coordinates u = (b + 3) / 4, v = (c + 2) / 4 the discriminant reads 4(4u − 3)³ + 27(4v − 2)².
        var regions = new ClassifierRegions(new NormalizedDiscriminant(), SmallAtlases.Cubic.Family.Parameters);

        var map = MapRenderer.Render(SmallAtlases.Cubic, new MapOptions { Width = 400, Height = 300, Regions = regions });

        Assert.Equal("model normalized discriminant", map.Description.Regions);
        Assert.Equal(ThreeRootAreaFraction, map.Description.Legend.Single(e => e.Label == 3).AreaFraction, 0.01);
        Assert.Equal(3, regions.LabelAt([ThreeRootB, ThreeRootC]));
        Assert.Equal(1, regions.LabelAt([OneRootB, OneRootC]));
    }

    [Fact]
    public void The_same_snapshot_and_options_give_the_same_bytes()
    {
        var options = new MapOptions { Width = 400, Height = 300 };
        Assert.Equal(MapRenderer.Render(SmallAtlases.Cubic, options).Png, MapRenderer.Render(SmallAtlases.Cubic, options).Png);
    }

    [Fact]
    public void Swapped_axes_put_c_horizontal()
    {
        var map = MapRenderer.Render(SmallAtlases.Cubic, new MapOptions { XAxis = "c", Width = 400, Height = 300 });

        Assert.Equal(new MapAxis("c", -2, 2), map.Description.X);
        Assert.Equal(new MapAxis("b", -3, 1), map.Description.Y);
        var png = PngReader.Decode(map.Png);
        Assert.Equal(map.Description.Legend.Single(e => e.Label == 3).RegionColor, Dominant(png, map.Description, ThreeRootC, ThreeRootB));
    }

    [Fact]
    public void Three_parameters_show_the_slab_of_one_tile_around_the_fixed_value()
    {
        var snapshot = SmallAtlases.Slab;

        var map = MapRenderer.Render(snapshot, new MapOptions { Fixed = new Dictionary<string, double> { ["c"] = 0.5 }, Width = 400, Height = 300 });

        Assert.Equal("a", map.Description.X.Name);
        Assert.Equal("b", map.Description.Y.Name);
        // [−1, 1] in 2 tiles: half-width one tile = 1.
        Assert.Equal([new MapFixedParameter("c", 0.5, 1.0)], map.Description.Fixed);
        var inSlab = snapshot.Samples.Count(s => Math.Abs(s.Sample.Point[2] - 0.5) <= 1.0);
        Assert.Equal(inSlab, map.Description.SamplesShown);
        Assert.InRange(inSlab, 1, snapshot.Samples.Count - 1);
        Assert.All(map.Description.Legend, e => Assert.Contains(e.Label, new[] { 0, 2 }));
    }

    [Fact]
    public void Three_parameters_fix_the_others_at_the_box_centre_by_default()
    {
        var map = MapRenderer.Render(SmallAtlases.Slab, new MapOptions { XAxis = "c", YAxis = "a", Width = 400, Height = 300 });

        Assert.Equal([new MapFixedParameter("b", 0.0, 1.0)], map.Description.Fixed);
    }

    [Theory]
    [InlineData("B", null, "--x: 'B': is not a parameter of this family (did you mean 'b'?); parameters: b, c")]
    [InlineData(null, "cc", "--y: 'cc': is not a parameter of this family (did you mean 'c'?); parameters: b, c")]
    public void An_unknown_axis_names_the_option_and_suggests_the_nearest_parameter(string? x, string? y, string message)
    {
        var error = Assert.Throws<InputException>(() => MapRenderer.Render(SmallAtlases.Cubic, new MapOptions { XAxis = x, YAxis = y }));
        Assert.Equal(message, error.Message);
    }

    [Fact]
    public void Fixing_an_axis_an_unknown_name_or_a_value_outside_the_box_is_an_input_error()
    {
        var axis = Assert.Throws<InputException>(() => Render(SmallAtlases.Cubic, ("b", 0.0)));
        Assert.Equal("--fix: 'b': is an axis of the map (--x); fix only the other parameters", axis.Message);

        var unknown = Assert.Throws<InputException>(() => Render(SmallAtlases.Slab, ("C", 0.0)));
        Assert.Equal("--fix: 'C': is not a parameter of this family (did you mean 'c'?); parameters: a, b, c", unknown.Message);

        var outside = Assert.Throws<InputException>(() => Render(SmallAtlases.Slab, ("c", 1.5)));
        Assert.Equal("--fix: 'c': the value 1.5 lies outside the box of c, [-1, 1]", outside.Message);
    }

    [Fact]
    public void The_same_parameter_on_both_axes_is_misuse()
    {
        Assert.Throws<ArgumentException>(() => MapRenderer.Render(SmallAtlases.Cubic, new MapOptions { XAxis = "b", YAxis = "b" }));
    }

    [Fact]
    public void A_one_parameter_family_has_no_map()
    {
        var family = TestFamilies.Build("line", ["x"], ["x^2 - a"], [("a", -1, 1)]);
        var snapshot = SmallAtlases.Sweep(family, [2], 1);

        var error = Assert.Throws<InputException>(() => MapRenderer.Render(snapshot, new MapOptions()));
        Assert.Contains("a map needs two parameters; this family has 1 (a)", error.Message, StringComparison.Ordinal);
    }

    private static MapImage Render(FiberWorkers.Atlas.Stores.AtlasSnapshot snapshot, (string Name, double Value) fix) =>
        MapRenderer.Render(snapshot, new MapOptions { Fixed = new Dictionary<string, double> { [fix.Name] = fix.Value }, Width = 400, Height = 300 });

    /// <summary>The most frequent color within 3 pixels of a slice point (markers and grid lines are thin).</summary>
    private static string Dominant(PngReader png, MapDescription map, double x, double y)
    {
        var (column, row) = map.PixelOf(x, y);
        return png.Dominant((int)Math.Round(column), (int)Math.Round(row), 3);
    }

    private sealed class NormalizedDiscriminant : FiberWorkers.Atlas.Learning.RegionClassifier
    {
        public override string Name => "normalized discriminant";

        public override int Classify(ReadOnlySpan<double> normalized)
        {
            var b = (4 * normalized[0]) - 3;
            var c = (4 * normalized[1]) - 2;
            return (4 * b * b * b) + (27 * c * c) < 0 ? 3 : 1;
        }
    }

    /// <summary>The exact regions: 3 where 4b³ + 27c² &lt; 0, else 1.</summary>
    private sealed class DiscriminantLabeler : IRegionLabeler
    {
        public string Name => "discriminant";

        public int LabelAt(ReadOnlySpan<double> point) => (4 * point[0] * point[0] * point[0]) + (27 * point[1] * point[1]) < 0 ? 3 : 1;
    }
}

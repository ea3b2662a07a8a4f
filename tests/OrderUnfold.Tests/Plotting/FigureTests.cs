using OrderUnfold.Plotting;
using OxyPlot.Axes;
using Xunit;

namespace OrderUnfold.Tests.Plotting;

/// <summary>The shared figure helpers: an axis built by them is the axis the figures used to build by hand.</summary>
public sealed class FigureTests
{
    [Fact]
    public void Axis_WithoutLimits_LeavesOxyPlotsAutomaticChoice()
    {
        var axis = Figure.Axis(AxisPosition.Bottom, "frequency (GHz)");
        var plain = new LinearAxis();
        Assert.Equal(AxisPosition.Bottom, axis.Position);
        Assert.Equal("frequency (GHz)", axis.Title);
        Assert.True(double.IsNaN(axis.Minimum) && double.IsNaN(axis.Maximum));
        Assert.Null(axis.StringFormat);
        Assert.Equal(plain.MinimumPadding, axis.MinimumPadding);
        Assert.Equal(plain.MaximumPadding, axis.MaximumPadding);
        // the house style: solid grid lines, and an axis line unless asked not to
        Assert.Equal(OxyPlot.LineStyle.Solid, axis.MajorGridlineStyle);
        Assert.Equal(OxyPlot.LineStyle.Solid, axis.AxislineStyle);
        Assert.Equal(plain.AxislineStyle, Figure.Axis(AxisPosition.Left, "y", axisLine: false).AxislineStyle);
    }

    [Fact]
    public void PanelAxis_TakesItsShareOfTheHeightAndItsKey()
    {
        var axis = Figure.PanelAxis("zoom", "zoom (linewidths)", 0, 0.38, minimum: 0, maximum: 12);
        Assert.Equal(("zoom", AxisPosition.Left), (axis.Key, axis.Position));
        Assert.Equal((0.0, 0.38), (axis.StartPosition, axis.EndPosition));
        Assert.Equal((0.0, 12.0), (axis.Minimum, axis.Maximum));
        Assert.Equal(new LinearAxis().MinimumPadding, axis.MinimumPadding);
        Assert.Equal(0.04, Figure.PanelAxis("top", "signal", 0.34, 1, padding: 0.04).MaximumPadding);
    }

    [Fact]
    public void NewModel_PutsTheLegendAboveThePlotInOneRow()
    {
        var model = Figure.NewModel("title", "subtitle");
        Assert.Equal(Plots.FontFamily, model.DefaultFont);
        var legend = Assert.Single(model.Legends);
        Assert.Equal(OxyPlot.Legends.LegendPlacement.Outside, legend.LegendPlacement);
        Assert.Equal(OxyPlot.Legends.LegendOrientation.Horizontal, legend.LegendOrientation);
    }

    [Theory]
    [InlineData(1, "1 line")]
    [InlineData(0, "0 lines")]
    [InlineData(3, "3 lines")]
    public void Count_IsPluralUnlessOne(int count, string expected) => Assert.Equal(expected, PlotFormat.Count(count, "line"));
}

using OxyPlot;
using OxyPlot.Axes;

namespace OrderUnfold.Plotting;

/// <summary>The colours shared by all plots, so one role reads the same in every image
/// (each plot class names its roles and takes the value from here).</summary>
internal static class Palette
{
    /// <summary>Data derived from the spectrum (grid spectrum, residuals, curves).</summary>
    public static readonly OxyColor Blue = OxyColor.FromRgb(0x2B, 0x5C, 0x8A);

    /// <summary>Lines and marks that matter (secure lines, envelope, hops).</summary>
    public static readonly OxyColor Crimson = OxyColor.FromRgb(0xB0, 0x1E, 0x3A);

    /// <summary>Doubtful lines.</summary>
    public static readonly OxyColor Ochre = OxyColor.FromRgb(0x8A, 0x6D, 0x00);

    /// <summary>Measured data and neutral marks.</summary>
    public static readonly OxyColor Charcoal = OxyColor.FromRgb(0x4A, 0x4A, 0x4A);

    /// <summary>Limits and floors.</summary>
    public static readonly OxyColor MidGrey = OxyColor.FromRgb(0x70, 0x70, 0x70);

    /// <summary>Grid lines.</summary>
    public static readonly OxyColor GridGrey = OxyColor.FromRgb(0xE6, 0xE6, 0xE6);

    /// <summary>The axis style every plot uses: solid light-grey major grid lines and, unless <paramref name="axisLine"/>
    /// is false, a solid axis line. Returns the axis, for use inside <c>model.Axes.Add(...)</c>.</summary>
    public static T Gridded<T>(T axis, bool axisLine = true) where T : Axis
    {
        axis.MajorGridlineStyle = LineStyle.Solid;
        axis.MajorGridlineColor = GridGrey;
        if (axisLine) axis.AxislineStyle = LineStyle.Solid;
        return axis;
    }
}

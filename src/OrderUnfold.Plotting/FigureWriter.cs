using OrderUnfold.Pipeline;

namespace OrderUnfold.Plotting;

/// <summary>The figures the workflow asks for (<see cref="IFigureWriter"/>), drawn with OxyPlot and written as PNG
/// atomically, or rendered as inline SVG for report.html; both from one <see cref="FigurePlan"/> per figure.</summary>
public sealed class FigureWriter : IFigureWriter
{
    /// <inheritdoc/>
    public UnfoldFigures WriteUnfold(UnfoldRun run, string directory)
    {
        Directory.CreateDirectory(directory);
        var plans = Plans(run);
        return new UnfoldFigures(plans.Select(f => f.Save(directory)).ToList(), plans.SelectMany(f => f.Svg()).ToList());
    }

    /// <inheritdoc/>
    public SvgFigure DrawTrack(TrackPlotInput input) =>
        new(input.Title, Figure.RenderSvg(TrackPlots.BuildTrack(input), TrackPlots.Size.Width, TrackPlots.Size.Height), TrackPlots.Size.Width);

    /// <inheritdoc/>
    public SvgFigure DrawSeries(SeriesPlotInput input) =>
        new(input.Title, Figure.RenderSvg(TrackPlots.BuildSeries(input), TrackPlots.Size.Width, TrackPlots.Size.Height), TrackPlots.Size.Width);

    /// <inheritdoc/>
    public void WriteTrack(string path, TrackPlotInput input) => TrackPlots.SaveTrack(path, input);

    /// <inheritdoc/>
    public void WriteSeries(string path, SeriesPlotInput input) => TrackPlots.SaveSeries(path, input);

    /// <summary>An unfold's figures in the order of the report: each sweep's fit, the spectrum (linear and dB), the line
    /// groups, the axis calibrations.</summary>
    private static List<FigurePlan> Plans(UnfoldRun run)
    {
        var figures = new List<FigurePlan>();
        var r = run.Result;
        for (var k = 0; k < run.Sweeps.Count; k++)
        {
            var s = run.Sweeps[k];
            var fit = r.Sweeps[k];
            var input = new SweepPlotInput($"Sweep {k + 1}: {s.Name} (reduced χ² {fit.ReducedChiSquare:F2})", s.ScanHz, s.Signal, fit.Model, s.Instrument.Name, s.Instrument.FsrHz);
            figures.Add(new FigurePlan($"sweep-{k + 1}-{UnfoldOutputs.Slug(s.Name)}.png", $"Sweep {k + 1} against its model, with residuals", FigureTopic.Sweep,
                Plots.SweepFitSize, () => Plots.BuildSweepFit(input)));
        }

        var marks = r.Lines.Select(l => new LineMark(l.FrequencyHz, l.Intensity, Quantity.FormatFrequency(l.FrequencyHz), l.Doubtful,
            l.FrequencySigmaHz, l.IntensityError)).ToList();
        var title = r.OrdersResolved ? "Unfolded spectrum" : "Folded spectrum (one instrument: orders unknown)";
        var spectrum = new SpectrumPlotInput(title, r.Grid.ToArray(), r.Spectrum, marks, run.Setup.Solve.AnchorFrequencyHz, r.DetectionLimit);
        figures.Add(new FigurePlan(OutputNames.SpectrumPlot, "Spectrum", FigureTopic.Spectrum, Plots.SpectrumSize, () => SpectrumPlot.Build(spectrum)));
        var statement = UnfoldOutputs.UnambiguousText(run);
        figures.Add(new FigurePlan(LinePlots.SpectrumDbFile, "Spectrum in dB with the detection limit", FigureTopic.Spectrum, LinePlots.SpectrumDbSize,
            () => LinePlots.BuildSpectrumDb(r, statement)));
        if (r.Lines.Count > 0)
        {
            var linewidth = run.Instruments.Max(i => i.LinewidthHz);
            figures.Add(new FigurePlan(LinePlots.LineGroupsFile, "Line groups: grid spectrum and refined lines (±1σ)", FigureTopic.Spectrum, LinePlots.PanelSize, null,
                () => LineGroupPanels.Render(r, linewidth), () => LineGroupPanels.Panels(r, linewidth)));
        }

        // a calibration reused from a file (--calibration) keeps its axis but not its points: its plots were written by
        // the calibrate command, and there is nothing to draw here
        foreach (var c in run.Calibrations.Where(c => c.PointX.Length > 0))
        {
            var direction = c.Direction.ToString().ToLowerInvariant();
            var xs = Enumerable.Range(0, 200).Select(i => c.Axis.XMin + (c.Axis.XMax - c.Axis.XMin) * i / 199.0).ToArray();
            var input = new AxisPlotInput($"Sweep axis of {c.Instrument} ({direction} ramp), degree {c.Axis.Degree}",
                "scan coordinate", c.PointX, c.PointHz, xs, c.Axis.Evaluate(xs), c.ResidualHz);
            figures.Add(new FigurePlan($"calibration-{UnfoldOutputs.Slug(c.Instrument)}-{direction}.png", $"Sweep axis of {c.Instrument}, {direction} ramp", FigureTopic.Calibration,
                Plots.AxisCalibrationSize, () => Plots.BuildAxisCalibration(input)));
        }

        return figures;
    }
}

using OrderUnfold.Pipeline;

namespace OrderUnfold.Plotting;

/// <summary>The figures the workflow asks for (<see cref="IFigureWriter"/>), drawn with OxyPlot and written as PNG
/// atomically.</summary>
public sealed class FigureWriter : IFigureWriter
{
    /// <inheritdoc/>
    public IReadOnlyList<string> WriteUnfold(UnfoldRun run, string directory)
    {
        var written = new List<string>();
        var r = run.Result;
        for (var k = 0; k < run.Sweeps.Count; k++)
        {
            var s = run.Sweeps[k];
            var fit = r.Sweeps[k];
            var p = Path.Combine(directory, $"sweep-{k + 1}-{UnfoldOutputs.Slug(s.Name)}.png");
            Plots.SaveSweepFit(p, new SweepPlotInput($"Sweep {k + 1}: {s.Name} (reduced χ² {fit.ReducedChiSquare:F2})", s.ScanHz, s.Signal, fit.Model, s.Instrument.Name, s.Instrument.FsrHz));
            written.Add(p);
        }

        var marks = r.Lines.Select(l => new LineMark(l.FrequencyHz, l.Intensity, Units.Quantity.FormatFrequency(l.FrequencyHz), l.Doubtful,
            l.FrequencySigmaHz, l.IntensityError)).ToList();
        var sp = Path.Combine(directory, OutputNames.SpectrumPlot);
        var title = r.OrdersResolved ? "Unfolded spectrum" : "Folded spectrum (one instrument: orders unknown)";
        Plots.SaveSpectrum(sp, new SpectrumPlotInput(title, r.Grid.ToArray(), r.Spectrum, marks, run.Setup.Solve.AnchorFrequencyHz, r.DetectionLimit));
        written.Add(sp);
        // line plots (dB spectrum with detection limit, zoom panels per line group): Plotting/LinePlots.cs
        written.AddRange(LinePlots.Write(directory, r, run.Instruments.Max(i => i.LinewidthHz), UnfoldOutputs.UnambiguousText(run)));
        // a calibration reused from a file (--calibration) keeps its axis but not its points: its plots were written by
        // the calibrate command, and there is nothing to draw here
        foreach (var c in run.Calibrations.Where(c => c.PointX.Length > 0))
        {
            var p = Path.Combine(directory, $"calibration-{UnfoldOutputs.Slug(c.Instrument)}-{c.Direction.ToString().ToLowerInvariant()}.png");
            var xs = Enumerable.Range(0, 200).Select(i => c.Axis.XMin + (c.Axis.XMax - c.Axis.XMin) * i / 199.0).ToArray();
            Plots.SaveAxisCalibration(p, new AxisPlotInput($"Sweep axis of {c.Instrument} ({c.Direction.ToString().ToLowerInvariant()} ramp), degree {c.Axis.Degree}",
                "scan coordinate", c.PointX, c.PointHz, xs, c.Axis.Evaluate(xs), c.ResidualHz));
            written.Add(p);
        }

        return written;
    }

    /// <inheritdoc/>
    public void WriteTrack(string path, TrackPlotInput input) => TrackPlots.SaveTrack(path, input);

    /// <inheritdoc/>
    public void WriteSeries(string path, SeriesPlotInput input) => TrackPlots.SaveSeries(path, input);
}

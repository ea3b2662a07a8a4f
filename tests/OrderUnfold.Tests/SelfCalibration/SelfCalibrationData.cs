using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Io;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;

namespace OrderUnfold.Tests.SelfCalibration;

/// <summary>Simulated scenarios and comparisons for the self-calibration tests. Every sweep here is simulated.</summary>
internal static class SelfCalibrationData
{
    /// <summary>One simulated record of a cavity, split into sweeps, with the true scan of each sweep.</summary>
    public sealed record Record(SimulatedCavity Cavity, SimulatedTrace Trace, IReadOnlyList<Sweep> Sweeps)
    {
        public double[] TrueScan(Sweep s) => Trace.TrueScanHz[s.FirstSample..(s.FirstSample + s.Count)];
    }

    /// <summary>Simulated source lines: four lines of unequal height within ±4 GHz (an invented multi-line source).</summary>
    public static SimulatedLine[] FourLines() =>
    [
        new(-2.23e9, 0.3), new(0, 1.0), new(0.61e9, 0.45), new(3.47e9, 0.6),
    ];

    /// <summary>A simulated nine-mode laser: modes 1.137 GHz apart with similar heights (0.7 to 1.0).</summary>
    public static SimulatedLine[] NineModes() =>
        Enumerable.Range(0, 9).Select(k => new SimulatedLine((k - 4) * 1.137e9, 0.85 + 0.15 * Math.Cos(1.3 * k))).ToArray();

    /// <summary>A planar cavity with the piezo: 5 % quadratic and 2 % cubic non-linearity (simulated).</summary>
    public static SimulatedCavity Cavity(string name, double lengthM, double finesse = 100, int samples = 6000, double spanFsr = 4,
        double quadratic = 0.05, double cubic = 0.02, double hysteresis = 0.03, double gain = 1.0) => new()
    {
        Instrument = Instrument.FromLength(name, lengthM, CavityGeometry.Planar, finesse),
        SpanFsr = spanFsr,
        Samples = samples,
        Quadratic = quadratic,
        Cubic = cubic,
        Hysteresis = hysteresis,
        Gain = gain,
    };

    /// <summary>Simulates the source record of each cavity (consuming the random numbers as <see cref="SimulatedSweeps.Calibrated"/> does).</summary>
    public static List<Record> Records(SimulationSpec spec)
    {
        var rng = new Random(spec.Seed);
        var list = new List<Record>();
        foreach (var cav in spec.Cavities)
        {
            var src = Simulator.Trace(spec, cav, false, rng);
            _ = Simulator.Trace(spec, cav, true, rng);
            list.Add(new Record(cav, src, SimulatedSweeps.Halves(src, cav.Instrument.Name, spec.Triangle)));
        }

        return list;
    }

    /// <summary>RMS difference between an axis and the true scan over the calibrated range, after removing the mean
    /// (the axis is only defined up to a constant).</summary>
    public static double AxisRmsHz(AxisPolynomial axis, Sweep sweep, double[] truth)
    {
        var idx = Enumerable.Range(0, sweep.Count).Where(i => sweep.X[i] >= axis.XMin && sweep.X[i] <= axis.XMax).ToArray();
        var d = idx.Select(i => axis.Evaluate(sweep.X[i]) - truth[i]).ToArray();
        var mean = d.Average();
        return Math.Sqrt(d.Average(v => (v - mean) * (v - mean)));
    }

    /// <summary>A calibrated sweep on an axis, keeping the samples inside its calibrated range as the pipeline does.</summary>
    public static CalibratedSweep OnAxis(Sweep s, Instrument instrument, AxisPolynomial axis)
    {
        var range = axis.XMax - axis.XMin;
        var keep = Enumerable.Range(0, s.Count).Where(i => s.X[i] >= axis.XMin - 0.02 * range && s.X[i] <= axis.XMax + 0.02 * range).ToArray();
        var y = keep.Select(i => s.Y[i]).ToArray();
        return new CalibratedSweep(s.Name, instrument, keep.Select(i => axis.Evaluate(s.X[i])).ToArray(), y, NoiseEstimator.FirstDifferenceSigma(y));
    }

    /// <summary>A calibrated sweep on the true (simulated) scan.</summary>
    public static CalibratedSweep OnTruth(Record r, Sweep s) => new(s.Name, r.Cavity.Instrument, r.TrueScan(s), s.Y, NoiseEstimator.FirstDifferenceSigma(s.Y));

    /// <summary>Pairs every expected line with the nearest found line; returns the largest distance, Hz.</summary>
    public static double WorstMatchHz(IEnumerable<double> expected, IReadOnlyList<UnfoldedLine> found) =>
        expected.Max(e => found.Min(l => Math.Abs(l.FrequencyHz - e)));

    /// <summary>Lines above a relative intensity (weak NNLS satellites left out).</summary>
    public static List<UnfoldedLine> MainLines(UnfoldResult r, double minIntensity = 0.05) => r.Lines.Where(l => l.Intensity >= minIntensity).ToList();
}

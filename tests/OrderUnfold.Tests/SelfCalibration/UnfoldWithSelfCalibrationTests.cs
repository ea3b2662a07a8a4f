using OrderUnfold.Calibration;
using OrderUnfold.Inversion;
using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.Simulation;
using Xunit;
using Xunit.Abstractions;
using static OrderUnfold.Tests.SelfCalibration.SelfCalibrationData;

namespace OrderUnfold.Tests.SelfCalibration;

/// <summary>The unfold on self-calibrated axes against the unfold on the true axes, through the pipeline from files
/// without calibration sweeps, and per ramp direction. All data simulated.</summary>
public sealed class UnfoldWithSelfCalibrationTests(ITestOutputHelper output) : IDisposable
{
    private readonly string _dir = Path.Combine(Path.GetTempPath(), "orderunfold-selfcal-" + Guid.NewGuid().ToString("N"));

    public void Dispose()
    {
        if (Directory.Exists(_dir)) Directory.Delete(_dir, recursive: true);
    }

    /// <summary>Two cavities with 5 % quadratic and 2 % cubic piezo non-linearity (different hysteresis), four lines, no calibration sweeps.</summary>
    private static SimulationSpec Spec() => new()
    {
        Label = "SIMULATED DATA: self-calibration test",
        Lines = FourLines(),
        Cavities =
        [
            Cavity("A", 0.1, finesse: 100, samples: 6000, spanFsr: 4, hysteresis: 0.03),
            Cavity("B", 0.0937, finesse: 100, samples: 6000, spanFsr: 4, hysteresis: 0.05, gain: 1.15),
        ],
        Seed = 31,
        CalibrationSweeps = false,
    };

    private static readonly UnfoldOptions Window = new() { WindowStartHz = -5e9, WindowEndHz = 5e9 };

    [Fact]
    public void Unfold_without_calibration_sweeps_self_calibrates_and_matches_the_unfold_on_the_true_axes()
    {
        var spec = Spec();
        var written = SimulationFiles.WriteScenario(spec, _dir, new SolveOptions { WindowStartHz = Window.WindowStartHz, WindowEndHz = Window.WindowEndHz });
        var run = UnfoldPipeline.Run(written.SetupPath);

        // the same traces on their true scan (SimulationFiles.Write draws the records in cavity order, sources only)
        var rng = new Random(spec.Seed);
        var truthSweeps = new List<CalibratedSweep>();
        foreach (var cav in spec.Cavities)
        {
            var trace = Simulator.Trace(spec, cav, false, rng);
            var record = new SelfCalibrationData.Record(cav, trace, SimulatedSweeps.Halves(trace, cav.Instrument.Name));
            truthSweeps.AddRange(record.Sweeps.Select(s => OnTruth(record, s)));
            // the pipeline's axes against the true scan: file segments start where the reader found the ramp turn,
            // and their time runs from that sample, so the true scan of a sample is at FirstSample + x / Δt
            foreach (var (raw, k) in run.RawSweeps.Select((r, k) => (r, k)).Where(t => run.Sweeps[t.k].Instrument.Name == cav.Instrument.Name))
            {
                var axis = run.Calibrations.Single(c => c.Source == raw.Name);
                var d = raw.X.Select(x => axis.Axis.Evaluate(x) - trace.TrueScanHz[raw.FirstSample + (int)Math.Round(x / spec.SampleIntervalS)]).ToArray();
                var mean = d.Average();
                var rms = Math.Sqrt(d.Average(v => (v - mean) * (v - mean)));
                output.WriteLine($"{axis.Source}: {axis.Method}, degree {axis.Axis.Degree}, residual {axis.ResidualRmsHz / 1e3:F1} kHz; true RMS error {rms / cav.Instrument.LinewidthHz:F4} linewidths");
                Assert.InRange(rms, 0, 0.1 * cav.Instrument.LinewidthHz);
            }
        }

        var perfect = Unfolder.Run(truthSweeps, Window);
        var self = MainLines(run.Result);
        var reference = MainLines(perfect);
        foreach (var l in reference) output.WriteLine($"true axes: {l.FrequencyHz / 1e6,10:F3} MHz {l.Intensity:F3}");
        foreach (var l in self) output.WriteLine($"self-cal:  {l.FrequencyHz / 1e6,10:F3} MHz {l.Intensity:F3}");
        var lw = spec.Cavities[0].Instrument.LinewidthHz;
        Assert.Equal(reference.Count, self.Count);
        Assert.Equal(spec.Lines.Count, self.Count);
        Assert.InRange(WorstMatchHz(reference.Select(l => l.FrequencyHz), self), 0, 0.05 * lw);
        Assert.InRange(WorstMatchHz(spec.Lines.Select(l => l.FrequencyHz), self), 0, 0.1 * lw);
        for (var i = 0; i < self.Count; i++) Assert.InRange(self[i].Intensity, reference[i].Intensity - 0.02, reference[i].Intensity + 0.02);

        // the report says which calibration was used and how good it is
        Assert.All(run.Calibrations, c => Assert.True(c.FromRepeats));
        var report = UnfoldOutputs.Report(run);
        Assert.Equal(4, report.Calibrations.Count);
        Assert.All(report.Calibrations, c =>
        {
            Assert.Contains("self-calibration from repeats", c.Method);
            Assert.True(c.ResidualRmsHz < 0.1 * lw);
        });
        // the finesse was measured from the source's isolated peaks
        Assert.All(run.Instruments, i => Assert.InRange(i.Finesse, 95, 105));
    }

    [Fact]
    public void Both_ramp_directions_with_different_non_linearity_give_consistent_line_lists()
    {
        var spec = Spec();
        var records = Records(spec);
        List<CalibratedSweep> Direction(RampDirection d) => records
            .SelectMany(r => r.Sweeps.Where(s => s.Direction == d)
                .Select(s => OnAxis(s, r.Cavity.Instrument, SelfCalibrator.Calibrate(s, r.Cavity.Instrument).Calibration.Axis)))
            .ToList();
        var up = MainLines(Unfolder.Run(Direction(RampDirection.Up), Window));
        var down = MainLines(Unfolder.Run(Direction(RampDirection.Down), Window));
        foreach (var (u, d) in up.Zip(down)) output.WriteLine($"up {u.FrequencyHz / 1e6,10:F3} MHz {u.Intensity:F3}   down {d.FrequencyHz / 1e6,10:F3} MHz {d.Intensity:F3}");
        var lw = spec.Cavities[0].Instrument.LinewidthHz;
        Assert.Equal(spec.Lines.Count, up.Count);
        Assert.Equal(up.Count, down.Count);
        Assert.InRange(WorstMatchHz(up.Select(l => l.FrequencyHz), down), 0, 0.1 * lw);
        Assert.InRange(WorstMatchHz(spec.Lines.Select(l => l.FrequencyHz), down), 0, 0.1 * lw);
    }
}

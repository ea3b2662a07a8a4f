using OrderUnfold.Calibration;
using OrderUnfold.Inversion;
using OrderUnfold.Simulation;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// The benchmark input: the demo scenario's source (six lines; SIMULATED DATA) seen by two planar cavities of
/// 100.0 mm and 93.7 mm (FSR ≈ 1.499 and 1.600 GHz, finesse 150), one single-direction sweep per cavity over
/// 5 FSRs, 8-bit digitiser, 0.4 % noise. Sweeps carry the simulator's true scan axis, offsets and gains, so the
/// solver benchmarks measure the solver, not the calibration.
/// </summary>
public sealed record SimulatedCase(List<CalibratedSweep> Sweeps, double[] OffsetsHz, double[] Gains)
{
    public static SimulatedCase TwoCavities(int samplesPerSweep, double spanFsr = 5)
    {
        var demo = Scenarios.Demo();
        var spec = demo with
        {
            Cavities = demo.Cavities.Select(c => c with { Samples = samplesPerSweep, SpanFsr = spanFsr }).ToList(),
            Triangle = false,
            Seed = 2026,
        };
        var rng = new Random(spec.Seed);
        var sweeps = new List<CalibratedSweep>();
        var offsets = new List<double>();
        var gains = new List<double>();
        foreach (var cav in spec.Cavities)
        {
            var trace = Simulator.Trace(spec, cav, calibration: false, rng);
            sweeps.Add(new CalibratedSweep(cav.Instrument.Name, cav.Instrument, trace.TrueScanHz, trace.Signal, NoiseEstimator.FirstDifferenceSigma(trace.Signal)));
            offsets.Add(trace.OffsetHz);
            gains.Add(cav.Gain);
        }

        return new SimulatedCase(sweeps, offsets.ToArray(), gains.ToArray());
    }

    /// <summary>Narrowest linewidth of the instruments.</summary>
    public double LinewidthHz => Sweeps.Min(s => s.Instrument.LinewidthHz);

    /// <summary>A grid of the unfolder's default step (a quarter linewidth), centred on 0, with the given bin count.</summary>
    public FrequencyGrid Grid(int bins)
    {
        var step = LinewidthHz / 4;
        return new FrequencyGrid(-(bins / 2) * step, step, bins);
    }

    /// <summary>The unfolder's periodic step: min(grid step / 2, linewidth / 20).</summary>
    public double PeriodicStepHz(FrequencyGrid grid) => Math.Min(grid.StepHz / 2, LinewidthHz / 20);

    /// <summary>L1 weight as the unfolder sets it: sparsity 3 × √(median squared column norm over 33 probe columns).</summary>
    public double L1Weight(FrequencyGrid grid)
    {
        var probe = new UnfoldProblem(Sweeps, grid, OffsetsHz, Gains, 0, 0, PeriodicStepHz(grid));
        var norms = Enumerable.Range(0, 33).Select(i => probe.ColumnNormSquared((int)((long)i * (grid.Count - 1) / 32))).OrderBy(v => v).ToList();
        return 3 * Math.Sqrt(norms[norms.Count / 2]);
    }
}

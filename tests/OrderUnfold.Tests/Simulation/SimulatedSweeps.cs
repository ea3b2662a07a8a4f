using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Io;
using OrderUnfold.Simulation;

namespace OrderUnfold.Tests.Simulation;

/// <summary>Builds calibrated sweeps straight from the simulator (no files), for solver tests. All data here is simulated.</summary>
internal static class SimulatedSweeps
{
    /// <summary>Splits a simulated triangle record into its up and down halves as sweeps (x = time from segment start).</summary>
    public static IReadOnlyList<Sweep> Halves(SimulatedTrace trace, string name, bool triangle = true)
    {
        var n = trace.Signal.Length;
        if (!triangle)
            return [new Sweep { Name = name, Source = name, X = trace.TimeS, Y = trace.Signal, Direction = RampDirection.Single, Scan = ScanCoordinate.Time }];
        var h = n / 2;
        Sweep Seg(int a, int b, RampDirection d) => new()
        {
            Name = $"{name} ({d.ToString().ToLowerInvariant()})",
            Source = name,
            X = trace.TimeS[a..b].Select(t => t - trace.TimeS[a]).ToArray(),
            Y = trace.Signal[a..b],
            Direction = d,
            Scan = ScanCoordinate.Time,
            FirstSample = a,
        };
        return [Seg(0, h, RampDirection.Up), Seg(h, n, RampDirection.Down)];
    }

    /// <summary>Simulates, calibrates each direction from the calibration record, and returns calibrated sweeps.</summary>
    public static List<CalibratedSweep> Calibrated(SimulationSpec spec, bool useTrueAxis = false)
    {
        var rng = new Random(spec.Seed);
        var result = new List<CalibratedSweep>();
        foreach (var cav in spec.Cavities)
        {
            var src = Simulator.Trace(spec, cav, false, rng);
            var cal = Simulator.Trace(spec, cav, true, rng);
            var srcHalves = Halves(src, cav.Instrument.Name, spec.Triangle);
            var calHalves = Halves(cal, cav.Instrument.Name + " cal", spec.Triangle);
            for (var k = 0; k < srcHalves.Count; k++)
            {
                var s = srcHalves[k];
                double[] scan;
                if (useTrueAxis)
                {
                    scan = src.TrueScanHz[s.FirstSample..(s.FirstSample + s.Count)];
                }
                else
                {
                    var axis = AxisCalibrator.FromCalibrationSweep(calHalves[k], cav.Instrument).Axis;
                    scan = axis.Evaluate(s.X);
                }

                result.Add(new CalibratedSweep(s.Name, cav.Instrument, scan, s.Y, NoiseEstimator.FirstDifferenceSigma(s.Y)));
            }
        }

        return result;
    }
}

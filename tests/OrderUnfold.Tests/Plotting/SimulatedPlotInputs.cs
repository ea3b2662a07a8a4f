using OrderUnfold.Instruments;
using OrderUnfold.Plotting;

namespace OrderUnfold.Tests.Plotting;

/// <summary>
/// Simulated inputs for the plot tests (invented data, seeded so every run draws the same pictures).
/// The same inputs produce the example images under docs/images.
/// </summary>
internal static class SimulatedPlotInputs
{
    /// <summary>Simulated lines: (offset from the anchor in Hz, relative intensity, doubtful?).</summary>
    private static readonly (double Hz, double Intensity, bool Doubtful)[] Lines =
    [
        (0.0, 1.00, false),
        (0.412e9, 0.58, false),
        (1.318e9, 0.22, false),
        (2.905e9, 0.71, false),
        (2.965e9, 0.64, false), // close to the previous one: their labels must not overlap
        (4.630e9, 0.35, false),
        (6.120e9, 0.06, true),
    ];

    /// <summary>A simulated sweep of an Airy comb over <paramref name="spanHz"/>, 2 500 samples, with noise
    /// and 8-bit quantisation of the measured signal; the model is the noiseless comb.</summary>
    public static SweepPlotInput Sweep(double spanHz = 4.4e9, double fsrHz = 1.5e9, double finesse = 150, int samples = 2500, int seed = 7)
    {
        var rng = new Random(seed);
        var f = new double[samples];
        var measured = new double[samples];
        var model = new double[samples];
        const double phase = 0.37e9;
        for (var i = 0; i < samples; i++)
        {
            // A mildly nonlinear scan: the frequency shift grows a little faster than the coordinate.
            var u = i / (double)(samples - 1);
            f[i] = 1.0e9 + spanHz * (0.94 * u + 0.06 * u * u);
            var y = 0.02;
            foreach (var (hz, a, _) in Lines)
                y += a * Airy.Transmission(hz - phase - f[i], fsrHz, finesse);
            model[i] = y;
            var noisy = y + 0.01 * Gaussian(rng);
            measured[i] = Math.Round(noisy * 180) / 180; // 8-bit-like quantisation
        }

        return new SweepPlotInput("Sweep fit, run 3 (simulated)", f, measured, model, "cavity A", fsrHz);
    }

    /// <summary>A simulated unfolded spectrum on a 2 MHz grid with sparse line bins, weak satellites,
    /// one doubtful line and a detection-limit curve.</summary>
    public static SpectrumPlotInput Spectrum(double? absoluteOffsetHz = 473.612345e12, int seed = 11)
    {
        var rng = new Random(seed);
        const double step = 2e6;
        var first = -1.0e9;
        var count = (int)Math.Round(8.2e9 / step);
        var grid = new double[count];
        var intensity = new double[count];
        var limit = new double[count];
        for (var i = 0; i < count; i++)
        {
            grid[i] = first + i * step;
            limit[i] = 0.035 + 0.015 * Math.Cos(2 * Math.PI * grid[i] / 3.3e9) + 0.004 * Gaussian(rng);
        }

        var marks = new List<LineMark>();
        var label = 'A';
        foreach (var (hz, a, doubtful) in Lines)
        {
            var pos = (hz - first) / step;
            var k = (int)Math.Floor(pos);
            var frac = pos - k;
            intensity[k] += a * (1 - frac);
            intensity[k + 1] += a * frac;
            if (rng.NextDouble() < 0.6) intensity[k + 3] += 0.02 * a; // a weak satellite bin
            marks.Add(new LineMark(hz, a, $"{label++}", doubtful,
                SigmaHz: doubtful ? 9e6 : 0.7e6 + 2e6 * (1 - a), IntensitySigma: 0.015 + 0.03 * a));
        }

        return new SpectrumPlotInput("Unfolded spectrum (simulated)", grid, intensity, marks, absoluteOffsetHz, limit);
    }

    /// <summary>A simulated cubic sweep-axis calibration on a 0–10 V ramp, with a few MHz of scatter.</summary>
    public static AxisPlotInput AxisCalibration(int points = 24, int seed = 5)
    {
        var rng = new Random(seed);
        static double F(double v) => 0.62e9 * v + 0.021e9 * v * v - 0.0009e9 * v * v * v;
        var px = new double[points];
        var pf = new double[points];
        var res = new double[points];
        for (var i = 0; i < points; i++)
        {
            px[i] = 0.3 + 9.4 * i / (points - 1) + 0.05 * Gaussian(rng);
            res[i] = 2.5e6 * Gaussian(rng);
            pf[i] = F(px[i]) + res[i];
        }

        var cx = Enumerable.Range(0, 201).Select(i => i * 10.0 / 200).ToArray();
        var cf = cx.Select(F).ToArray();
        return new AxisPlotInput("Sweep-axis calibration, up ramp (simulated)", "ramp voltage (V)", px, pf, cx, cf, res);
    }

    /// <summary>One simulated transmission peak (FSR 1.5 GHz, finesse 150) sampled on 241 points.</summary>
    public static FinessePlotInput Finesse(int samples = 241, int seed = 3)
    {
        var rng = new Random(seed);
        const double fsr = 1.5e9, finesse = 150;
        var d = new double[samples];
        var measured = new double[samples];
        var model = new double[samples];
        for (var i = 0; i < samples; i++)
        {
            d[i] = -60e6 + 120e6 * i / (samples - 1);
            model[i] = 0.01 + Airy.Transmission(d[i], fsr, finesse);
            measured[i] = model[i] + 0.012 * Gaussian(rng);
        }

        return new FinessePlotInput("Finesse from one peak, cavity A (simulated)", d, measured, model, 151.37, 1.24);
    }

    private static double Gaussian(Random rng)
    {
        var u1 = 1.0 - rng.NextDouble();
        var u2 = rng.NextDouble();
        return Math.Sqrt(-2 * Math.Log(u1)) * Math.Cos(2 * Math.PI * u2);
    }
}

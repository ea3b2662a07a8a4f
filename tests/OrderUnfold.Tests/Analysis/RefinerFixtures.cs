using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Simulation;

namespace OrderUnfold.Tests.Analysis;

/// <summary>
/// Small, fast inputs for <see cref="OrderUnfold.Analysis.LineRefiner"/>, all SIMULATED: sweeps with a linear scan axis,
/// Airy lines, a gain, a background and white Gaussian noise of known σ; and a hand-built grid result (what the NNLS
/// stage would hand over) so that the refiner can be tested without running the unfolder.
/// </summary>
internal static class RefinerFixtures
{
    /// <summary>A simulated line: frequency relative to the sweeps' common origin and its intensity (peak signal at gain 1).</summary>
    /// <param name="WidthHz">Intrinsic Lorentzian FWHM; the line is then an Airy of linewidth (instrument + intrinsic) with its
    /// area kept, the high-finesse form of a Lorentzian convolved with the Airy peak.</param>
    public sealed record Line(double FrequencyHz, double Intensity, double WidthHz = 0);

    /// <summary>How one simulated sweep is taken: instrument, samples, span in FSRs, its origin φ (Hz), gain, background, noise σ.</summary>
    public sealed record FixtureSweep(Instrument Instrument, int Samples, double SpanFsr, double OffsetHz, double Gain = 1, double Background = 0.05,
        double NoiseSigma = 0.01);

    /// <summary>y_i = g·Σ_j a_j·T(ν_j − φ − f_i) + b + σ·N(0,1), with f_i evenly spaced over the span (simulated).</summary>
    public static CalibratedSweep Sweep(string name, FixtureSweep spec, IReadOnlyList<Line> lines, Random rng, bool noise = true)
    {
        var n = spec.Samples;
        var span = spec.SpanFsr * spec.Instrument.FsrHz;
        var scan = new double[n];
        var y = new double[n];
        for (var i = 0; i < n; i++)
        {
            scan[i] = span * i / n;
            var v = 0.0;
            foreach (var l in lines)
            {
                var inst = spec.Instrument;
                var d = l.FrequencyHz - spec.OffsetHz - scan[i];
                v += l.WidthHz > 0
                    ? l.Intensity * inst.LinewidthHz / (inst.LinewidthHz + l.WidthHz) * Airy.Transmission(d, inst.FsrHz, inst.FsrHz / (inst.LinewidthHz + l.WidthHz))
                    : l.Intensity * inst.Transmission(d);
            }
            y[i] = spec.Gain * v + spec.Background + (noise ? spec.NoiseSigma * Simulator.Gaussian(rng) : 0);
        }

        return new CalibratedSweep(name, spec.Instrument, scan, y, spec.NoiseSigma);
    }

    /// <summary>
    /// A grid result as the unfolder would return it, built from (possibly perturbed) line guesses: frequencies relative
    /// to the strongest guess, sweep offsets and gains relative to the first sweep's gain, one bin per line.
    /// </summary>
    public static UnfoldResult Grid(IReadOnlyList<CalibratedSweep> sweeps, IReadOnlyList<FixtureSweep> specs, IReadOnlyList<Line> guesses,
        double windowStartHz, double windowEndHz, bool ordersResolved)
    {
        var anchor = guesses.MaxBy(l => l.Intensity)!;
        var step = sweeps.Min(s => s.Instrument.LinewidthHz) / 4;
        var grid = FrequencyGrid.Covering(windowStartHz - anchor.FrequencyHz, windowEndHz - anchor.FrequencyHz, step);
        var spectrum = new double[grid.Count];
        var lines = new List<UnfoldedLine>();
        foreach (var g in guesses.OrderBy(l => l.FrequencyHz))
        {
            var rel = g.FrequencyHz - anchor.FrequencyHz;
            var bin = Math.Clamp((int)Math.Round((rel - grid.StartHz) / step), 0, grid.Count - 1);
            spectrum[bin] += g.Intensity / anchor.Intensity;
            lines.Add(new UnfoldedLine(rel, g.Intensity / anchor.Intensity, g.Intensity * specs[0].Gain, 100, bin, bin));
        }

        var fits = sweeps.Select((s, k) => new SweepFit(s.Name, s.Instrument.Name, specs[k].OffsetHz - anchor.FrequencyHz, specs[k].Gain / specs[0].Gain,
            specs[k].Background, s.NoiseSigma, s.Signal.Length, 1, s.NoiseSigma, s.Signal.Length)).ToList();
        return new UnfoldResult
        {
            Grid = grid,
            Spectrum = spectrum,
            Lines = lines,
            Sweeps = fits,
            Solver = new NnlsResult(spectrum, 0, 0, SolverStatus.Converged, "hand-built grid result (test fixture)", 0, lines.Count),
            OrdersResolved = ordersResolved,
            UnambiguousRangeHz = windowEndHz - windowStartHz,
        };
    }
}

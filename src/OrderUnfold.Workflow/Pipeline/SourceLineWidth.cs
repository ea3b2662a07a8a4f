using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline;

/// <summary>What the widths of a source's peaks said about its lines.</summary>
/// <param name="Instrument">Instrument name.</param>
/// <param name="CavityFinesse">Finesse of the cavity (from its calibration sweep).</param>
/// <param name="ApparentFinesse">Finesse the source's isolated peaks show on the same axis.</param>
/// <param name="ApparentSigma">Standard error of that.</param>
/// <param name="LineWidthHz">Intrinsic (Lorentzian) FWHM of the source lines it implies: the difference of the linewidths.</param>
/// <param name="PeaksFitted">Peaks the apparent finesse rests on.</param>
public sealed record SourceWidthFinding(string Instrument, double CavityFinesse, double ApparentFinesse, double ApparentSigma, double LineWidthHz, int PeaksFitted);

/// <summary>
/// Source lines that have a width of their own (a multimode diode, a gas discharge, a pulsed source) are broader
/// through the cavity than the calibration laser: the cavity's Airy response convolved with a Lorentzian of FWHM w is
/// again an Airy function, of linewidth FSR/𝓕 + w (the Airy function is a Poisson kernel in the round-trip phase, and
/// Poisson kernels multiply their radii under convolution; for w much smaller than the FSR that is the sum of the
/// widths). Solving with the calibration laser's narrower response makes the grid explain each broad peak with a
/// cluster of narrow lines, false ones at aliases included. So where a calibration sweep fixed the cavity finesse, the
/// source's own isolated peaks are fitted on the same axis; when they are clearly broader (the apparent finesse more
/// than 5 % and 3 σ below the cavity's), the source's sweeps are solved with the apparent response and the implied
/// line width is reported. The instrument's reported finesse stays the cavity's.
/// </summary>
public static class SourceLineWidth
{
    /// <summary>Relative broadening below which the cavity response is kept.</summary>
    public const double MinRelativeBroadening = 0.05;

    /// <summary>Fits the source peaks per instrument and, where they are broader, returns the sweeps with the broadened
    /// instrument in place of the cavity's. <paramref name="segments"/> holds, per calibrated sweep, its raw segment and its axis.</summary>
    public static (IReadOnlyList<CalibratedSweep> Sweeps, IReadOnlyList<SourceWidthFinding> Findings) Apply(IReadOnlyList<CalibratedSweep> calibrated,
        IReadOnlyList<(Sweep Segment, AxisCalibration Axis)> segments, IReadOnlyList<AxisCalibration> calibrations, ISet<string> fixedFinesse)
    {
        var sweeps = calibrated.ToArray();
        var findings = new List<SourceWidthFinding>();
        foreach (var group in Enumerable.Range(0, sweeps.Length).GroupBy(k => sweeps[k].Instrument.Name))
        {
            var name = group.Key;
            var inst = sweeps[group.First()].Instrument;
            // only where the finesse came from a calibration laser: a self-calibrated finesse is already the source's
            if (fixedFinesse.Contains(name) || !calibrations.Any(c => c.Instrument == name && !c.FromRepeats && c.Finesse is not null)) continue;
            var estimates = group.Select(k => FinesseFit.FromSweep(segments[k].Segment, segments[k].Axis.Axis, inst.FsrHz, inst.Finesse))
                .Where(e => e is { Consistent: true, Peaks.Count: > 0 }).Select(e => e!).ToList();
            if (estimates.Count == 0) continue;
            var w = estimates.Select(e => 1 / (e.Sigma * e.Sigma)).ToArray();
            var apparent = estimates.Select((e, i) => w[i] * e.Finesse).Sum() / w.Sum();
            var sigma = 1 / Math.Sqrt(w.Sum());
            if (!(apparent < (1 - MinRelativeBroadening) * inst.Finesse && inst.Finesse - apparent > 3 * sigma)) continue;
            var broadened = inst with { Finesse = apparent };
            foreach (var k in group) sweeps[k] = sweeps[k] with { Instrument = broadened };
            findings.Add(new SourceWidthFinding(name, inst.Finesse, apparent, sigma, inst.FsrHz / apparent - inst.FsrHz / inst.Finesse, estimates.Sum(e => e.Peaks.Count)));
        }

        return (sweeps, findings);
    }
}

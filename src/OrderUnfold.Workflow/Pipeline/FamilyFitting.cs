using OrderUnfold.Analysis;
using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;

namespace OrderUnfold.Pipeline;

/// <summary>The instruments with their transverse families as fitted to the sweeps, and what the fit said.</summary>
internal sealed record FamilyFitOutcome(IReadOnlyDictionary<string, Instrument> Instruments, IReadOnlyList<string> Warnings, IReadOnlyList<string> Notes);

/// <summary>The stage after the line refinement that reports each cavity's transverse families as fitted to the sweeps.</summary>
internal static class FamilyFitting
{
    /// <summary>
    /// Fits each instrument's transverse families (offset and height) to its sweeps with the refined lines held and puts the
    /// fitted values into the instrument as reported cavity properties, when the fit converged, lowered χ² and moved no
    /// offset by more than a linewidth from the calibration's measurement (else the measured values stay, with a warning).
    /// The lines are not refitted: the families they were solved with are the measured ones.
    /// </summary>
    public static FamilyFitOutcome Fit(IReadOnlyList<CalibratedSweep> sweeps, UnfoldResult result, IReadOnlyDictionary<string, Instrument> settled,
        CancellationToken cancellationToken = default)
    {
        var instruments = settled.ToDictionary(p => p.Key, p => p.Value);
        var warnings = new List<string>();
        var notes = new List<string>();
        foreach (var name in instruments.Keys.ToList())
        {
            var inst = instruments[name];
            if (inst.Families.Count == 0) continue;
            var fit = FamilyFit.Fit(sweeps, result, name, cancellationToken: cancellationToken);
            if (fit is null) continue;
            var lw = inst.LinewidthHz / inst.FsrHz;
            var measured = inst.Families;
            var sane = fit.Families.Zip(measured).All(t => PeriodDecider.CircularDistance(t.First.ApparentOffsetFsr, t.Second.ApparentOffsetFsr) <= lw &&
                                                              t.First.RelativeHeight > 0 && double.IsFinite(t.First.OffsetSigmaFsr));
            if (!fit.Converged || !(fit.ChiSquareAfter <= fit.ChiSquareBefore) || !sane)
            {
                warnings.Add($"instrument '{name}': the fit of its transverse families to the sweeps did not settle (converged: {fit.Converged}, χ² {fit.ChiSquareBefore:G4} → {fit.ChiSquareAfter:G4}); the values measured from the peak heights are reported");
                continue;
            }

            instruments[name] = inst with
            {
                Families = fit.Families.Zip(measured).Select(t => new CavityModeFamily(t.Second.N, CavityModeFamily.Frac(-t.First.ApparentOffsetFsr), t.First.RelativeHeight,
                    $"fitted to the sweeps with the lines: {t.First.ApparentOffsetFsr:F5} ± {t.First.OffsetSigmaFsr:G2} FSR after TEM00, height {t.First.RelativeHeight:F4} ± {t.First.HeightSigma:G2} (statistical) " +
                    $"(measured from the peaks: {t.Second.ApparentOffsetFsr:F4}, {t.Second.RelativeHeight:F3})")).ToList(),
            };
            notes.Add($"instrument '{name}': transverse families fitted to the sweeps with the refined lines (χ² {fit.ChiSquareBefore:G6} → {fit.ChiSquareAfter:G6}, {fit.Iterations} iterations): " +
                      string.Join(", ", fit.Families.Select(f => $"N={f.N} at {f.ApparentOffsetFsr:F5} ± {f.OffsetSigmaFsr:G2} FSR, {100 * f.RelativeHeight:F1} ± {100 * f.HeightSigma:G2} % (statistical σ)")));
        }

        return new FamilyFitOutcome(instruments, warnings, notes);
    }
}

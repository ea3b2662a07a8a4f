using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Io;

namespace OrderUnfold.Pipeline;

/// <summary>The instruments as settled for the rest of the run, with the axes that match them.</summary>
/// <param name="Instruments">Instruments by name, in the setup's order.</param>
/// <param name="Calibrations">The axes, at the settled FSRs.</param>
/// <param name="Warnings">What the settlement decided that the user should know.</param>
public sealed record SettledInstruments(IReadOnlyDictionary<string, Instrument> Instruments, IReadOnlyList<AxisCalibration> Calibrations, IReadOnlyList<string> Warnings)
{
    /// <summary>The axes as calibration built them, in the order of <see cref="Calibrations"/> (empty: those are as built);
    /// a later decision of the FSR converts these once (<see cref="InstrumentSettlement.WithDecidedFsr"/>).</summary>
    public IReadOnlyList<AxisCalibration> Built { get; init; } = [];
}

/// <summary>
/// The one stage that decides each instrument's finesse and FSR from the calibration evidence and hands the settled
/// instruments on: the finesse is the median the calibration peaks measured (calibration sweeps before the source's own
/// repeats, ring-down decay included; the stated value when fix_finesse = true, refused when the peaks contradict it); the
/// FSR is the period the peak patterns decided (<see cref="CalibrationSteps.SettleCavityProperties"/>, with the transverse
/// families). With a saved calibration reused, its instruments stand as saved.
/// </summary>
internal static class InstrumentSettlement
{
    /// <summary>Settles <paramref name="instruments"/> (as stated, or as saved when <paramref name="reused"/>) from <paramref name="calibrations"/>.</summary>
    public static SettledInstruments Settle(Setup setup, IReadOnlyDictionary<string, Instrument> instruments, IReadOnlyList<AxisCalibration> calibrations, bool reused)
    {
        if (reused) return new SettledInstruments(instruments, calibrations, []);
        var specs = setup.Instruments.ToDictionary(i => i.Name);
        var warnings = new List<string>();
        var withFinesse = instruments.ToDictionary(p => p.Key, p => SettleFinesse(p.Value, specs[p.Key].FixFinesse, calibrations, setup.Path, warnings));
        var cavity = CalibrationSteps.SettleCavityProperties(withFinesse, calibrations, n => specs[n].FixFinesse);
        return new SettledInstruments(cavity.Instruments, cavity.Calibrations, [.. warnings, .. cavity.Warnings]) { Built = cavity.Built };
    }

    /// <summary>
    /// The effective finesse of one instrument: the median of what its calibration peaks measured (calibration sweeps first,
    /// then the source's own peaks), unless fix_finesse keeps the stated value; a stated value the peaks contradict by more
    /// than 1.5× is refused, by more than 1.2× warned about; a measured value more than 20 % from the stated one is named.
    /// </summary>
    private static Instrument SettleFinesse(Instrument inst, bool fixFinesse, IReadOnlyList<AxisCalibration> calibrations, string? setupPath, List<string> warnings)
    {
        var name = inst.Name;
        var withFinesse = calibrations.Where(c => c.Instrument == name && c.Finesse is not null).ToList();
        if (withFinesse.Any(c => !c.FromRepeats)) withFinesse = withFinesse.Where(c => !c.FromRepeats).ToList();
        var measured = withFinesse.Select(c => c.Finesse!.Value).ToList();
        if (measured.Count == 0) return inst;
        var f = Medians.Upper(measured);
        if (fixFinesse)
        {
            // the stated value is kept, as asked; but a fit with a linewidth the peaks contradict explains every line
            // with a cloud of false ones (too narrow) or merges neighbours (too wide): that is refused, not reported
            var factor = Math.Max(f / inst.Finesse, inst.Finesse / f);
            if (factor > 1.5)
                throw new InputException($"instrument '{name}': fix_finesse = true keeps the stated finesse {inst.Finesse:G4}, but the calibration peaks measure {f:G4} ({factor:F1}× {(f < inst.Finesse ? "lower" : "higher")}); a fit with the stated linewidth would report false or merged lines. Correct the finesse or set fix_finesse = false to use the measured value", setupPath);
            if (factor > 1.2)
                warnings.Add($"instrument '{name}': the calibration peaks measure finesse {f:F0}, {factor:F2}× the stated (fixed) {inst.Finesse:F0}; the stated value is used as fix_finesse = true asks, and line widths and intensities carry that error");
            return inst;
        }

        if (Math.Abs(f / inst.Finesse - 1) > 0.2)
            warnings.Add($"instrument '{name}': measured finesse {f:F0} differs from the stated {inst.Finesse:F0} by more than 20 %; using the measured value (set fix_finesse = true to keep the stated one)");
        return inst with { Finesse = Math.Max(1, f) };
    }

    /// <summary>
    /// The instruments and axes at the FSRs the decision from the lines settled on (<see cref="FsrDecisionStage"/>): the
    /// decision comes before any sweep of the results is built, and each instrument's axes are converted here from the FSR
    /// calibration built them at to the decided FSR, once (<see cref="AxisCalibration.AtFsr"/>). The method text names the
    /// change from the FSR settled before the decision.
    /// </summary>
    public static SettledInstruments WithDecidedFsr(SettledInstruments settled, FsrRefinement decision)
    {
        var instruments = settled.Instruments.ToDictionary(p => p.Key, p => p.Value);
        var calibrations = settled.Calibrations.ToList();
        var built = settled.Built.Count == calibrations.Count ? settled.Built : settled.Calibrations;
        foreach (var s in decision.Instruments)
        {
            if (!instruments.TryGetValue(s.Instrument, out var inst) || s.RelativeChange == 0) continue;
            var change = s.RefinedFsrHz / inst.FsrHz - 1;
            instruments[s.Instrument] = inst with { FsrHz = s.RefinedFsrHz };
            for (var i = 0; i < calibrations.Count; i++)
            {
                var c = built[i];
                if (c.Instrument != s.Instrument) continue;
                // an axis that states no built-at FSR is taken to be at the FSR settled before the decision
                calibrations[i] = c.AtFsr(s.RefinedFsrHz, inst.FsrHz) with { Method = calibrations[i].Method + $"; FSR refined by {100 * change:+0.000;-0.000} % ({s.Basis})" };
            }
        }

        return settled with { Instruments = instruments, Calibrations = calibrations };
    }
}

using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Units;

namespace OrderUnfold.Pipeline;

/// <summary>
/// Lines that are the residue of a transverse family of the cavity, not lines of the source. The unfold models each family
/// of the cavity as part of its response, at the offset and height the calibration measured; where the model's family peak
/// is a little off (the offset scatters between the axes by a fraction of a linewidth), the grid puts a weak extra "line"
/// where the family's peaks are. With one cavity such a line cannot be told from the family: its peaks lie on the family's
/// peaks of a stronger line in every sweep. It is left out of the line list and named in a warning.
/// </summary>
public static class FamilyResidue
{
    /// <summary>
    /// Leaves out every line whose frequency above a stronger line S is, modulo the FSR, the apparent offset of one of the
    /// cavity's families N (within that family's offset spread over the calibrated axes, plus the largest axis uncertainty,
    /// plus one linewidth — two peaks closer than a linewidth are not resolved), and whose intensity is at most the
    /// family's relative height times S's. Only when every sweep belongs to one cavity: a second cavity with other FSR and
    /// families places a real line there differently, and the joint unfold tells them apart.
    /// </summary>
    /// <param name="result">The unfold result (lines relative to the anchor).</param>
    /// <param name="instruments">The instruments of the sweeps (with their families).</param>
    /// <param name="calibrations">The axes (their period decisions carry each axis's measured family offsets).</param>
    /// <returns>The result without the residue lines, and the warning naming them (null when none was left out).</returns>
    public static (UnfoldResult Result, string? Warning) Apply(UnfoldResult result, IReadOnlyList<Instrument> instruments, IReadOnlyList<AxisCalibration> calibrations)
    {
        var distinct = instruments.Select(i => i.Name).Distinct().ToList();
        if (distinct.Count != 1 || result.Lines.Count < 2) return (result, null);
        var inst = instruments.First();
        if (inst.Families.Count == 0) return (result, null);
        var fsr = inst.FsrHz;
        var mine = calibrations.Where(c => c.Instrument == inst.Name).ToList();
        var axisSigma = mine.Select(c => c.AxisSigmaHz ?? 0).Where(double.IsFinite).DefaultIfEmpty(0).Max();
        var tolerance = new Dictionary<int, double>();
        foreach (var f in inst.Families)
        {
            var offsets = mine.SelectMany(c => c.PeriodDecision?.Families ?? []).Where(g => g.N == f.N).Select(g => g.ApparentOffsetFsr).ToList();
            var spread = offsets.Count > 1 ? offsets.Max() - offsets.Min() : 0;
            tolerance[f.N] = spread + axisSigma / fsr + inst.LinewidthHz / fsr;
        }

        // strongest first: only a line that stays can be the parent of a residue (a residue has no families of its own)
        var residue = new List<(UnfoldedLine Line, UnfoldedLine Parent, CavityModeFamily Family, double Offset)>();
        var kept = new List<UnfoldedLine>();
        foreach (var line in result.Lines.OrderByDescending(l => l.Intensity))
        {
            var found = false;
            foreach (var parent in kept.Where(p => p.Intensity > line.Intensity))
            {
                var d = CavityModeFamily.Frac((line.FrequencyHz - parent.FrequencyHz) / fsr);
                var family = inst.Families.FirstOrDefault(f => PeriodDecider.CircularDistance(d, f.ApparentOffsetFsr) <= tolerance[f.N] + (line.FrequencySigmaHz is double s && double.IsFinite(s) ? s : 0) / fsr &&
                                                               line.Intensity <= f.RelativeHeight * parent.Intensity);
                if (family is null) continue;
                residue.Add((line, parent, family, d));
                found = true;
                break;
            }

            if (!found) kept.Add(line);
        }

        if (residue.Count == 0) return (result, null);
        var warning = $"{residue.Count} weak line(s) left out as residue of the cavity's transverse families (with one cavity their peaks lie on a family's peaks of a stronger line in every sweep and cannot be told from a small misfit of that family): " +
                     string.Join(", ", residue.Select(r => $"{Quantity.FormatFrequency(r.Line.FrequencyHz)} (intensity {r.Line.Intensity:F4}, {r.Offset:F4} FSR above the line at {Quantity.FormatFrequency(r.Parent.FrequencyHz)}, " +
                                                             $"where its N={r.Family.N} family lies at {r.Family.ApparentOffsetFsr:F4} ± {tolerance[r.Family.N]:F4} FSR)"));
        return (result with { Lines = result.Lines.Except(residue.Select(r => r.Line)).ToList() }, warning);
    }
}

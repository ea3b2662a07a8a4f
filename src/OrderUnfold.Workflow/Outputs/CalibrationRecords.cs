using System.Globalization;
using OrderUnfold.Calibration;
using OrderUnfold.Io;
using static OrderUnfold.Outputs.OutputJson;

namespace OrderUnfold.Outputs;

/// <summary>Builds the calibration records (calibration.json, calibration-report.json and the parts report.json shares)
/// from the calibration types, and the calibration back from calibration.json.</summary>
public static class CalibrationRecords
{
    /// <summary>Transverse families: index, Gouy offset and apparent offset (fractions of the FSR), relative height, basis.</summary>
    public static IReadOnlyList<FamilyRecord> Families(IEnumerable<CavityModeFamily> families) =>
        families.Select(f => new FamilyRecord(f.N, Finite(f.GouyOffsetFsr), Finite(f.ApparentOffsetFsr), Finite(f.RelativeHeight), f.Basis)).ToList();

    /// <summary>The period decision with its candidates; null when none was made.</summary>
    public static PeriodDecisionRecord? PeriodDecision(PeriodDecision? d) => d is null ? null : new PeriodDecisionRecord(
        Finite(d.PeriodScan), Finite(d.PeriodHz), Finite(d.StatedFsrHz), d.Basis, d.Fundamental,
        d.Candidates.Select(c => new PeriodCandidateRecord(c.Label, Finite(c.PeriodScan), Finite(c.Explained), c.Predictions,
            Finite(c.HeightAgreement), c.Groups, c.Consistent, c.Chosen)).ToList(),
        Families(d.Families));

    /// <summary>The FSR refinement.</summary>
    public static FsrRefinementRecord Fsr(FsrRefinement r) => new(
        r.Rounds, Finite(r.ReducedChiSquareBefore), Finite(r.ReducedChiSquareAfter), Finite(r.MaxLineShiftHz),
        r.Instruments.Select(s => new FsrInstrumentRecord(s.Instrument, Finite(s.NominalFsrHz), Finite(s.RefinedFsrHz), Finite(s.SigmaHz),
            Finite(s.RelativeChange), s.Basis)).ToList(),
        r.Intervals.Select(i => new KnownIntervalRecord(Finite(i.LowerHz), Finite(i.UpperHz), i.Multiple, Finite(i.StatedHz),
            Finite(i.MeasuredHz), Finite(i.SigmaHz))).ToList(),
        r.LineShifts.Select(s => new LineShiftRecord(Finite(s.BeforeHz), Finite(s.AfterHz))).ToList(),
        r.Notes.ToList());

    /// <summary>calibration.json of a calibration set.</summary>
    public static CalibrationFileRecord Saved(CalibrationSet set) => new(
        CalibrationFileRecord.FormatName, CalibrationFileRecord.CurrentSchemaVersion, null, set.Source,
        set.Instruments.Select(i => new SavedInstrument(i.Name, i.Geometry, i.FsrHz, i.Finesse, i.LengthM, i.RefractiveIndex,
            i.FinesseMeasured, Families(i.Families))).ToList(),
        set.Axes.Select(a => new SavedAxis(a.Instrument, a.Direction, a.Method, a.Source, a.Axis.Coefficients.ToList(), a.Axis.Center,
            a.Axis.HalfRange, a.Axis.XMin, a.Axis.XMax, Finite(a.ResidualRmsHz), a.ShapeCovariance?.ToList(), a.PointCount,
            Finite(a.Finesse), Finite(a.FinesseSigma), PeriodDecision(a.PeriodDecision))).ToList());

    /// <summary>The calibration set a calibration.json holds; <see cref="InputException"/> naming <paramref name="path"/> when
    /// it is another file, another version, or damaged.</summary>
    public static CalibrationSet ToSet(CalibrationFileRecord record, string path)
    {
        if (record.Format != CalibrationFileRecord.FormatName)
            throw new InputException($"not an OrderUnfold calibration file (expected \"format\": \"{CalibrationFileRecord.FormatName}\")", path);
        var version = record.SchemaVersion ?? (record.Version == CalibrationFileRecord.LegacyVersion ? record.Version : null);
        if (version is not (CalibrationFileRecord.CurrentSchemaVersion or CalibrationFileRecord.LegacyVersion))
            throw new InputException($"calibration file schema_version {record.SchemaVersion?.ToString(CultureInfo.InvariantCulture) ?? record.Version?.ToString(CultureInfo.InvariantCulture) ?? "(none)"} is not supported (this build reads {CalibrationFileRecord.CurrentSchemaVersion}, and version {CalibrationFileRecord.LegacyVersion} files)", path);
        if (record.Instruments is null || record.Axes is null)
            throw new InputException($"damaged calibration file: it has no \"{(record.Instruments is null ? "instruments" : "axes")}\" list", path);
        try
        {
            var instruments = record.Instruments.Select(n => new Instrument(n.Name, n.FsrHz, n.Finesse, n.Geometry, n.LengthM, n.RefractiveIndex ?? 1.0)
            {
                FinesseMeasured = n.FinesseMeasured ?? true,
                Families = (n.TransverseFamilies ?? []).Select(Reused).ToList(),
            }).ToList();
            var axes = record.Axes.Select(n => Axis(n, path)).ToList();
            return new CalibrationSet(instruments, axes, path);
        }
        catch (Exception e) when (e is NullReferenceException or InvalidOperationException or FormatException or ArgumentException)
        {
            throw new InputException($"damaged calibration file: {e.Message}", path);
        }
    }

    private static CavityModeFamily Reused(FamilyRecord f) => new(f.N,
        f.GouyOffsetFsr ?? throw new FormatException("a transverse family has no gouy_offset_fsr"),
        f.RelativeHeight ?? throw new FormatException("a transverse family has no relative_height"),
        (f.Basis ?? "measured") + " (reused)");

    private static AxisCalibration Axis(SavedAxis n, string path)
    {
        var poly = new AxisPolynomial(n.CoefficientsHz.ToArray(), n.Center, n.HalfRange, n.XMin, n.XMax);
        var cov = n.ShapeCovarianceHz2?.ToArray();
        if (cov is not null && cov.Length != poly.Degree * poly.Degree)
            throw new FormatException($"shape_covariance_hz2 has {cov.Length} values; a degree-{poly.Degree} axis needs {poly.Degree * poly.Degree}");
        return new AxisCalibration(n.Instrument, n.Direction, n.Source ?? path, (n.Method ?? "calibration file") + " (reused)", poly, [], [], [],
            n.ResidualRmsHz ?? double.NaN, n.Finesse, n.FinesseSigma, [])
        {
            ShapeCovariance = cov,
        };
    }

    /// <summary>calibration-report.json: the calibration beside the instruments as the setup states them.</summary>
    public static CalibrationReportRecord Report(CalibrationSet set, IReadOnlyList<Instrument> stated, IReadOnlyList<string> warnings,
        FsrRefinement? fsr, string? toolVersion)
    {
        var statedByName = stated.ToDictionary(i => i.Name);
        var byName = set.Instruments.ToDictionary(i => i.Name);
        return new CalibrationReportRecord(
            CalibrationReportRecord.CurrentSchemaVersion,
            "orderunfold",
            toolVersion ?? typeof(CalibrationRecords).Assembly.GetName().Version?.ToString(3),
            DateTime.UtcNow.ToString("yyyy-MM-ddTHH:mm:ssZ", CultureInfo.InvariantCulture),
            set.Source,
            set.Instruments.Select(i =>
            {
                var s = statedByName.GetValueOrDefault(i.Name);
                return new CalibratedInstrumentRecord(i.Name, i.Geometry, Finite(i.FsrHz), Finite(s?.FsrHz), Finite(i.Finesse),
                    Finite(s?.Finesse), Finite(i.LinewidthHz));
            }).ToList(),
            set.Axes.Select(a => ReportAxis(a, byName.GetValueOrDefault(a.Instrument))).ToList(),
            fsr is null ? null : Fsr(fsr),
            warnings.ToList());
    }

    private static CalibrationAxisRecord ReportAxis(AxisCalibration a, Instrument? inst)
    {
        var lw = inst?.LinewidthHz;
        var t = a.TransverseModes;
        return new CalibrationAxisRecord(
            a.Instrument, a.Direction, a.Source, a.Method, a.FromRepeats, a.Axis.Degree, a.PointCount,
            a.FromRepeats ? a.PairsUsed : null,
            a.FromRepeats ? a.PairsRejected : null,
            Finite(a.ResidualRmsHz),
            lw is double l ? Finite(a.ResidualRmsHz / l) : null,
            Finite(a.ResidualHz.Select(Math.Abs).DefaultIfEmpty(double.NaN).Max()),
            Finite(a.AxisSigmaHz), Finite(a.Axis.XMin), Finite(a.Axis.XMax), Finite(a.Finesse), Finite(a.FinesseSigma),
            FinesseFit(a.FinesseDetail),
            PeriodDecision(a.PeriodDecision),
            t is null ? null : new TransverseModesRecord(t.MainPeaks, Finite(t.AlternationRatio),
                t.Families.Select(f => new TransverseFamilyRecord(Finite(f.OffsetFsr), Finite(f.RelativeHeight), f.Count, f.Periods, f.HalfPeriod)).ToList()),
            a.Axis.Coefficients.Select(v => Finite(v)).ToList(), Finite(a.Axis.Center), Finite(a.Axis.HalfRange),
            a.Warnings.ToList());
    }

    private static FinesseFitRecord? FinesseFit(FinesseEstimate? f) => f is null ? null : new FinesseFitRecord(
        Finite(f.Finesse), Finite(f.Sigma), f.Peaks.Count, Finite(f.ScatterChiSquare), f.Consistent,
        f.Profile?.AiryShaped, Finite(f.Profile?.RmsDeviation), Finite(f.Profile?.OddRms), Finite(f.Profile?.NoiseRms),
        f.Profile?.DetuningFwhm.Select(v => Finite(v)).ToList(), f.Profile?.Measured.Select(v => Finite(v)).ToList());
}

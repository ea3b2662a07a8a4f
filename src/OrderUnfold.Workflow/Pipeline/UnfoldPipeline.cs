using System.Security.Cryptography;
using OrderUnfold.Analysis;
using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Io;
using OrderUnfold.Numerics;
using OrderUnfold.Units;

namespace OrderUnfold.Pipeline;

/// <summary>
/// One unfold from a setup, in named stages: calibration and the settled instruments (<see cref="CalibrationStage"/>,
/// <see cref="InstrumentSettlement"/>), the source files read (<see cref="SourceSweeps.ReadFiles"/>), the FSRs decided from
/// the lines when asked (<see cref="FsrDecisionStage"/>), the source sweeps built once on the axes at the decided FSRs
/// (<see cref="SourceSweeps.Build"/>), the grid solve and the line refinement (<see cref="UnfoldStages"/>), the refusals of a model that cannot explain the data
/// (<see cref="RunChecks"/>), and the cavity properties and line-list choices after the fit (<see cref="FamilyFitting"/>,
/// <see cref="FamilyResidue"/>, <see cref="ExtrapolationShare"/>).
/// </summary>
public static class UnfoldPipeline
{
    /// <summary>Reduced χ² of the grid fit above which a line refinement that ran out of its budget is not reported but refused
    /// (the grid's many lines then absorb a model mismatch).</summary>
    public const double PoorFitReducedChiSquare = 1.5;

    /// <summary>Most grid lines reported unrefined when the refinement runs out of its budget; more are refused.</summary>
    public const int MaxUnrefinedLines = 40;

    /// <summary>
    /// CPU seconds of one run up to the end of the line stage: the line stage gets what the stages before it left, at most
    /// its own budget (<see cref="RefineOptions.CpuBudgetSeconds"/>, 8 s) and at least <see cref="MinLineFitCpuSeconds"/>.
    /// Chosen so that no unfold of up to two records of 50 000 samples takes more than 20 s of CPU with the default
    /// settings, whatever the mismatch between setup and data (issue 15; measured in docs/performance.md with
    /// scripts/mismatch-cpu-probe.sh: a cavity stated confocal instead of planar took 23 s, 14 of them before the line fit;
    /// a line stage that tries the fewest-lines explanation first shares this budget with it, UnfoldStages.RefineLines).
    /// A line fit cut short ends as one that used up its own budget: the lines not yet refined keep their grid values with
    /// widened uncertainties, or the run is refused when the grid fits poorly (<see cref="RunChecks.RefuseExhaustedBudget"/>).
    /// </summary>
    public const double RunCpuBudgetSeconds = 15;

    /// <summary>The least CPU time the line fit gets however long the stages before it took (see
    /// <see cref="RunCpuBudgetSeconds"/>).</summary>
    public const double MinLineFitCpuSeconds = 2;

    /// <summary>The line fit's CPU budget after <paramref name="usedSeconds"/> of the run.</summary>
    public static double LineFitCpuSeconds(double usedSeconds) =>
        Math.Clamp(RunCpuBudgetSeconds - usedSeconds, MinLineFitCpuSeconds, new RefineOptions().CpuBudgetSeconds);

    /// <summary>Reduced χ² of the final fit of any sweep above which the run is refused; see
    /// <see cref="UnfoldThresholds.MismatchReducedChiSquare"/> for the value and why.</summary>
    public const double MismatchReducedChiSquare = UnfoldThresholds.MismatchReducedChiSquare;

    /// <summary>Reads a setup file and runs it.</summary>
    public static UnfoldRun Run(string setupPath, IProgress<string>? progress = null, CalibrationSet? reuse = null, CancellationToken cancellationToken = default) =>
        Run(SetupReader.Read(setupPath), progress, reuse, cancellationToken);

    /// <summary>Runs a setup. With <paramref name="reuse"/>, the setup's calibration sweeps are skipped and the saved axes
    /// and instrument parameters are used instead (archived sweeps of one session share one calibration). A cancelled
    /// <paramref name="cancellationToken"/> stops the run in whichever stage it is (<see cref="OperationCanceledException"/>).</summary>
    public static UnfoldRun Run(Setup setup, IProgress<string>? progress = null, CalibrationSet? reuse = null, CancellationToken cancellationToken = default)
    {
        try
        {
            return RunSetup(setup, progress, reuse, cancellationToken);
        }
        catch (InputException e) when (e.File is null && setup.Path is not null)
        {
            throw e.At(setup.Path); // a problem of the [solve] settings: name the setup file
        }
    }

    private static UnfoldRun RunSetup(Setup setup, IProgress<string>? progress, CalibrationSet? reuse, CancellationToken cancellationToken)
    {
        var cpuStart = WorkBudget.ThreadCpuSeconds();
        var setupFile = setup.Path is not null ? new[] { Describe("setup", setup.Path) } : [];
        var calibration = CalibrationStage.Run(setup, progress, reuse, cancellationToken);
        var segments = SourceSweeps.ReadFiles(setup, calibration.Settled.Instruments, progress, cancellationToken);
        var options = UnfoldStages.OptionsFor(setup.Solve);
        // with refine_fsr or a known interval the FSRs are decided from the lines (a search with trial unfolds of its own)
        // before any sweep of the results exists; the axes are put at the decided FSRs once and the sweeps built from them
        var fsrDecision = FsrDecisionStage.Run(setup, segments, calibration.Settled, options, progress, cancellationToken);
        var settled = fsrDecision is null ? calibration.Settled : InstrumentSettlement.WithDecidedFsr(calibration.Settled, fsrDecision);
        var sources = SourceSweeps.Build(setup, segments, settled);
        var grid = UnfoldStages.SolveOnGrid(sources.Sweeps, options, fsrDecision, progress, cancellationToken);
        var sweeps = grid.Sweeps;
        var fsrRefined = fsrDecision is not null;

        // a grid fit this poor cannot be polished into a right answer: refuse before spending the refinement's budget
        RunChecks.RefuseMismatch(grid.Result, sweeps, "grid", fsrRefined, setup.Path);
        var lineFitCpu = LineFitCpuSeconds(WorkBudget.ThreadCpuSeconds() - cpuStart);
        var lines = UnfoldStages.RefineLines(grid, options, setup.Solve, lineFitCpu, progress, cancellationToken);
        RunChecks.RefuseExhaustedBudget(lines, grid, settled, setup.Path);
        RunChecks.RefuseMismatch(lines.Result, sweeps, lines.Refinement is null ? "grid" : "line", fsrRefined, setup.Path);
        if (lines.Refinement is { FellBackToGrid: false }) RunChecks.RefuseWorseThanGrid(grid.Result, lines.Result, setup.Path!);

        // the cavity's transverse families fitted to the sweeps with the refined lines held (Analysis/FamilyFit.cs)
        var families = lines.Refinement is not null ? FamilyFitting.Fit(sweeps, lines.Result, settled.Instruments, cancellationToken) : new FamilyFitOutcome(settled.Instruments, [], []);
        var (fewer, fewerWarning) = RunChecks.FewerLines(lines.Result, setup.Solve.MinSnr);
        // a weak line on a family's peaks of a stronger line is that family's residue when one cavity measured it (FamilyResidue.cs)
        var sweepInstruments = sweeps.Select(c => families.Instruments.TryGetValue(c.Instrument.Name, out var i) ? i : c.Instrument).ToList();
        var (withoutResidue, residueWarning) = FamilyResidue.Apply(fewer, sweepInstruments, settled.Calibrations);
        var result = ExtrapolationShare.Apply(withoutResidue, sweeps);

        return new UnfoldRun
        {
            Setup = setup,
            Inputs = setupFile.Concat(calibration.Inputs).Concat(sources.Inputs).DistinctBy(i => i.Path).ToList(),
            Instruments = families.Instruments.Values.ToList(),
            Calibrations = settled.Calibrations,
            Sweeps = sweeps,
            RawSweeps = sources.Raw,
            Result = result,
            Refinement = lines.Refinement,
            FsrRefinement = grid.FsrRefinement,
            Warnings = [.. calibration.Warnings, .. sources.Warnings, .. grid.Warnings, .. lines.Warnings, .. families.Warnings,
                .. new[] { fewerWarning, residueWarning }.OfType<string>()],
            Notes = [.. sources.Notes, .. families.Notes],
            Window = grid.Window,
        };
    }

    /// <summary>Calibration only: the axes and instruments a setup's calibration sweeps give (for <c>calibrate</c>).</summary>
    public static CalibrationSet Calibrate(Setup setup, IProgress<string>? progress, out IReadOnlyList<string> warnings,
        CancellationToken cancellationToken = default)
    {
        var calibration = CalibrationStage.Run(setup, progress, null, cancellationToken);
        warnings = calibration.Warnings;
        return new CalibrationSet(calibration.Settled.Instruments.Values.ToList(), calibration.Settled.Calibrations.ToList(), setup.Path ?? "setup");
    }

    /// <summary>Reads a file's segments; for time scans x is made relative to each segment's start, so that a
    /// calibration made on one segment applies to another segment of the same direction.</summary>
    internal static IReadOnlyList<Sweep> ReadSegments(SweepFileOptions file, CancellationToken cancellationToken = default)
    {
        var segments = SweepReader.ReadSweeps(file, cancellationToken);
        if (segments.Count == 0) throw new InputException("no sweep segment of the requested ramp direction was found", file.Path);
        foreach (var seg in segments)
            if (InvertedSignal(seg.Y) is { } why)
                throw new InputException($"{seg.Name}: the signal's peaks point down ({why}): a transmission sweep has a low baseline and peaks upward, so this signal looks inverted (a negated channel, an inverting amplifier, or a reflection signal); negate the column before the analysis", file.Path);
        return segments.Select(s => s.Scan == ScanCoordinate.Time ? s with { X = s.X.Select(v => v - s.X[0]).ToArray() } : s).ToList();
    }

    /// <summary>
    /// Null for a signal whose peaks point up; otherwise what shows that they point down. A transmission sweep spends most
    /// of its samples near its baseline, between the peaks, so the median sits near the minimum: the distance from the
    /// median to the maximum exceeds that to the minimum. The test asks for the reverse by a factor of 4, with the dips
    /// at least 20 noise σ deep (the median absolute difference of neighbouring samples) so that noise alone never trips it.
    /// </summary>
    internal static string? InvertedSignal(IReadOnlyList<double> y)
    {
        if (y.Count < 16) return null;
        var sorted = y.Where(double.IsFinite).OrderBy(v => v).ToArray();
        if (sorted.Length < 16) return null;
        double min = sorted[0], max = sorted[^1], median = Medians.Upper(sorted);
        var sigma = NoiseEstimator.FirstDifferenceSigma(y.ToArray());
        var down = median - min;
        var up = max - median;
        if (down > 4 * up && down > 20 * sigma)
            return $"baseline (median) {median:G4}, maximum {max:G4} only {up:G3} above it, minimum {min:G4} {down:G3} below it";
        return null;
    }

    internal static Instrument Lookup(IReadOnlyDictionary<string, Instrument> instruments, string name, string file) =>
        instruments.TryGetValue(name, out var i) ? i : throw new InputException($"unknown instrument '{name}'", file);

    /// <summary>Size and SHA-256 of a file, read without modifying it.</summary>
    public static InputFile Describe(string role, string path)
    {
        InputLimits.CheckFile(path, role + " file"); // never hash a device, a FIFO or an oversized file
        using var stream = File.OpenRead(path);
        var hash = SHA256.HashData(stream);
        return new InputFile(role, Path.GetFullPath(path), stream.Length, Convert.ToHexString(hash).ToLowerInvariant());
    }
}

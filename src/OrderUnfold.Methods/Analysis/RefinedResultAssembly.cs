using MathNet.Numerics.LinearAlgebra;
using OrderUnfold.Inversion;

namespace OrderUnfold.Analysis;

/// <summary>
/// The refinement's result from a settled fit: the order check and the bootstrap within the budget, each line's
/// frequency, intensity and uncertainties (<see cref="RefinedLineBuilder"/>), the order verdicts, the sweep fits with the
/// refined model, the detection limit, the unambiguous range and the diagnostics.
/// </summary>
internal static class RefinedResultAssembly
{
    /// <summary>Assembles the result of <paramref name="rounds"/> (settled, with at least one line).</summary>
    public static (UnfoldResult, RefinementDiagnostics) Assemble(RefinementContext context, RoundsOutcome rounds)
    {
        var (layout, fit, grid, budget) = (rounds.Layout, rounds.Fit!, context.Grid, context.Budget);
        var anchor = Enumerable.Range(0, layout.LineCount).MaxBy(j => fit.Parameters[layout.Intensity(j)]);
        var solution = new RefinedSolution(layout, fit, rounds.Tracked, anchor);
        var (anchorHz, aAnchor) = (solution.AnchorHz, solution.AnchorIntensity);

        // order confidence first (it decides what is reported), then the bootstrap, both within the budget
        var (alternatives, orderStop) = grid.OrdersResolved ? OrderCheck.Run(context, solution) : (new AlternativePlacement?[layout.LineCount], null);
        var bootstrap = LineUncertainties.Bootstrap(context, solution);

        var red = fit.ChiSquare / Math.Max(1, context.Samples.Count - ParameterLayout.FreeCount(solution.FixedMask()));
        var builder = new RefinedLineBuilder(context, solution, bootstrap, LineUncertainties.AxisCovariance(context.Samples, layout, fit));
        var refined = Enumerable.Range(0, layout.LineCount).Select(builder.Build).ToList();
        if (grid.OrdersResolved) ApplyOrderVerdicts(context, refined, alternatives, orderStop);
        var sweepFits = SweepFits(context, solution);

        // internal frequencies are relative to sweep 0's origin: internal = (old relative) − φ₀(old)
        var phi0 = grid.Sweeps[0].OffsetHz;
        var shiftedGrid = new FrequencyGrid(grid.Grid.StartHz - phi0 - anchorHz, grid.Grid.StepHz, grid.Grid.Count);
        // the limit uses the same test as the pruning: Wald z² against the threshold with the χ²-scaled variance
        var detection = DetectionLimitCurve.Compute(context.Sweeps, grid with { Grid = shiftedGrid, Sweeps = sweepFits }, context.Threshold * red, aAnchor);
        var spectrumScale = grid.Lines.Max(l => l.RawIntensity) / aAnchor;

        // unambiguous range for the weakest kept line at this noise
        var weakest = Enumerable.Range(0, layout.LineCount).MinBy(j => fit.Parameters[layout.Intensity(j)]);
        var aWeak = fit.Parameters[layout.Intensity(weakest)];
        var (range, lowerBound, statement) = OrderAmbiguity.Statement(context, sweepFits, aWeak, aAnchor);

        var result = grid with
        {
            Grid = shiftedGrid,
            Spectrum = grid.Spectrum.Select(v => v * spectrumScale).ToArray(),
            Lines = refined.OrderBy(l => l.FrequencyHz).ToList(),
            Sweeps = sweepFits,
            DetectionLimit = detection,
            Warnings = context.Warnings,
            ReducedChiSquare = red,
            Refined = true,
        };
        var diag = new RefinementDiagnostics(fit.Converged, fit.Reason, fit.Iterations, fit.ChiSquare, red, context.Threshold, rounds.Dropped)
        {
            Merged = rounds.Merged,
            Pinned = rounds.Pinned,
            IterationsUsed = budget.Used,
            IterationBudget = context.Options.IterationBudget,
            CpuSeconds = budget.CpuSeconds,
            BudgetExhausted = budget.Exhausted is null ? null : $"{budget.Exhausted} (after the line fit: order check or bootstrap cut short)",
            Groups = context.Samples.LineGroups(layout, fit.Parameters).Distinct().Count(),
            UnambiguousRangeHz = range,
            UnambiguousRangeIsLowerBound = lowerBound,
            UnambiguousForIntensity = LineRefiner.FiniteOrNull(aWeak / aAnchor),
            UnambiguousStatement = statement,
        };
        return (result, diag);
    }

    /// <summary>Order confidence: each line's Δχ² to its best alternative placement decides its verdict (unknown where the
    /// check was cut short); a doubtful line adds a warning.</summary>
    private static void ApplyOrderVerdicts(RefinementContext context, List<UnfoldedLine> refined, AlternativePlacement?[] alternatives, string? orderStop)
    {
        var doubtfulBelow = context.Options.DoubtfulDeltaChiSquare;
        for (var j = 0; j < refined.Count; j++)
        {
            if (alternatives[j] is not var (shift, dchi))
            {
                refined[j] = refined[j] with
                {
                    Verdict = OrderVerdict.Unknown,
                    Note = string.Join("; ", new[] { refined[j].Note, $"order not checked: {orderStop}" }.Where(n => n is not null)),
                };
                continue;
            }

            var doubtful = dchi < doubtfulBelow;
            refined[j] = refined[j] with
            {
                AliasShiftHz = LineRefiner.FiniteOrNull(shift),
                AliasDeltaChiSquare = LineRefiner.FiniteOrNull(dchi),
                Verdict = doubtful ? OrderVerdict.Doubtful : OrderVerdict.Secure,
            };
            if (doubtful)
                context.Warnings.Add($"line at {Quantity.FormatFrequency(refined[j].FrequencyHz)}: its order is doubtful; moved by {Quantity.FormatFrequency(shift)} it fits almost as well (Δχ² = {dchi:F1})");
        }
    }

    /// <summary>Each sweep's fit with the refined model: offset relative to the anchor, gain, background, χ² and residuals.</summary>
    private static List<SweepFit> SweepFits(RefinementContext context, RefinedSolution solution)
    {
        var (samples, sweeps, grid) = (context.Samples, context.Sweeps, context.Grid);
        var (layout, p) = (solution.Layout, solution.Fit.Parameters);
        var model = samples.Model(layout, p);
        var sweepFits = new List<SweepFit>();
        for (var k = 0; k < sweeps.Count; k++)
        {
            var (start, count) = samples.Range(k);
            var (chi, ss) = samples.SweepResiduals(k, model);
            var dof = Math.Max(1, count - (layout.Count / sweeps.Count));
            var phi = (k == 0 ? 0 : p[layout.Offset(k)]) - solution.AnchorHz;
            var g = k == 0 ? 1 : p[layout.Gain(k)];
            sweepFits.Add(grid.Sweeps[k] with
            {
                OffsetHz = phi, Gain = g, Background = p[layout.Background(k)], ChiSquare = chi, ReducedChiSquare = chi / dof, ResidualRms = Math.Sqrt(ss / count),
                Model = model[start..(start + count)],
            });
        }

        return sweepFits;
    }
}

/// <summary>One refined line for the report: its frequency relative to the anchor, intensity relative to it, their
/// uncertainties (covariance, Cramér–Rao bound, bootstrap, scan axes), width, and the notes that go with them.</summary>
internal sealed class RefinedLineBuilder(RefinementContext context, RefinedSolution solution, double[]? bootstrap, Matrix<double>? axisCovariance)
{
    /// <summary>The bootstrap error replaces the covariance error when it is more than this multiple of it (1/0.7; the
    /// bootstrap's own relative scatter at 40 replicates is about 11 %, so a gap this large is not its noise). Chosen;
    /// documented in docs/uncertainties.md.</summary>
    private const double BootstrapAboveCovariance = 1.43;

    /// <summary>… or less than this multiple of it (see <see cref="BootstrapAboveCovariance"/>).</summary>
    private const double BootstrapBelowCovariance = 0.7;

    private readonly ParameterLayout _layout = solution.Layout;
    private readonly double[] _p = solution.Fit.Parameters;
    private readonly Matrix<double> _scaled = solution.Fit.ScaledCovariance;
    private readonly int _anchor = solution.Anchor;
    private readonly double _widestLinewidthHz = context.WidestLinewidthHz;

    private static double VarianceOfDifference(Matrix<double> c, int i1, int i2) => c[i1, i1] + c[i2, i2] - 2 * c[i1, i2];

    /// <summary>The report line of line <paramref name="j"/> (verdict secure when orders are resolved, else unknown; the
    /// order check's result is applied afterwards).</summary>
    public UnfoldedLine Build(int j)
    {
        var t = solution.Tracked[j];
        var note = new List<string>(t.Notes);
        var nu = _p[_layout.Position(j)] - solution.AnchorHz;
        var a = _p[_layout.Intensity(j)];
        var aAnchor = solution.AnchorIntensity;
        int nj = _layout.Position(j), na = _layout.Position(_anchor), aj = _layout.Intensity(j), aa = _layout.Intensity(_anchor);
        var cs = _scaled;
        double? sigNu = j == _anchor ? 0 : LineRefiner.FiniteOrNull(Math.Sqrt(VarianceOfDifference(cs, nj, na)));
        double? crbNu = j == _anchor ? 0 : LineRefiner.FiniteOrNull(Math.Sqrt(VarianceOfDifference(solution.Fit.InverseFisher, nj, na)));
        if (t.Pinned) sigNu = crbNu = null;
        var rel = a / aAnchor;
        var varRel = j == _anchor ? 0 : rel * rel * (cs[aj, aj] / (a * a) + cs[aa, aa] / (aAnchor * aAnchor) - 2 * cs[aj, aa] / (a * aAnchor));
        var snr = LineRefiner.FiniteOrNull(a / Math.Sqrt(cs[aj, aj]));
        if (!t.Pinned && (sigNu is null || snr is null || (j != _anchor && !double.IsFinite(varRel))))
            note.Add("singular covariance: this line's parameters are not all determined by the data, so some uncertainties are missing");
        if (t.Pinned && j == _anchor) note.Add("the anchor's position is pinned, so the other lines' frequency uncertainties leave out the anchor's");
        var (reportedSigma, bootSigma, axisSigma) = FrequencySigma(j, sigNu, note);
        NoteCloseNeighbour(j, note);
        var fitsWidths = context.Options.FitWidths;
        double? width = fitsWidths ? Math.Abs(_p[_layout.Width(j)]) : null;
        double? widthSigma = fitsWidths ? LineRefiner.FiniteOrNull(Math.Sqrt(cs[_layout.Width(j), _layout.Width(j)])) : null;
        return new UnfoldedLine(nu, rel, a, snr ?? t.Grid.Snr, t.FirstBin, t.LastBin)
        {
            FrequencySigmaHz = reportedSigma,
            FrequencyAxisSigmaHz = axisSigma,
            FrequencyCrbHz = crbNu,
            IntensitySigma2 = LineRefiner.FiniteOrNull(Math.Sqrt(varRel)),
            BootstrapSigmaHz = bootSigma,
            WidthHz = width,
            WidthSigmaHz = widthSigma,
            Verdict = context.Grid.OrdersResolved ? OrderVerdict.Secure : OrderVerdict.Unknown,
            Note = note.Count > 0 ? string.Join("; ", note) : null,
        };
    }

    /// <summary>The frequency uncertainty to report: the covariance one (<paramref name="covarianceSigma"/>), or the
    /// bootstrap one when the two disagree, combined with the scan axes' own uncertainty; also the bootstrap and axis parts.</summary>
    private (double? Reported, double? Bootstrap, double? Axis) FrequencySigma(int j, double? covarianceSigma, List<string> note)
    {
        var pinned = solution.Tracked[j].Pinned;
        double? bootSigma = bootstrap is null ? null : LineRefiner.FiniteOrNull(bootstrap[j]);
        var reportedSigma = covarianceSigma;
        if (bootSigma is double bs && covarianceSigma is double sc && j != _anchor && !pinned
            && (bs > BootstrapAboveCovariance * sc || bs < BootstrapBelowCovariance * sc))
        {
            reportedSigma = bs;
            note.Add($"covariance and bootstrap errors disagree ({Quantity.FormatFrequency(sc, 2)} vs {Quantity.FormatFrequency(bs, 2)}): bootstrap used");
        }

        // the calibrated axes' own uncertainty, combined with the statistical one
        int nj = _layout.Position(j), na = _layout.Position(_anchor);
        double? axisSigma = axisCovariance is null || pinned ? null
            : j == _anchor ? 0 : LineRefiner.FiniteOrNull(Math.Sqrt(Math.Max(0, VarianceOfDifference(axisCovariance, nj, na))));
        if (reportedSigma is double rs && axisSigma is double ax) reportedSigma = Math.Sqrt(rs * rs + ax * ax);
        return (reportedSigma, bootSigma, axisSigma);
    }

    /// <summary>A neighbour closer than a (widest) linewidth but not merged: strongly correlated parameters, said in a note.</summary>
    private void NoteCloseNeighbour(int j, List<string> note)
    {
        for (var i = 0; i < _layout.LineCount; i++)
        {
            if (i == j) continue;
            var d = Math.Abs(_p[_layout.Position(i)] - _p[_layout.Position(j)]);
            if (d < _widestLinewidthHz)
            {
                note.Add($"another line lies {Quantity.FormatFrequency(d, 3)} away (less than a linewidth): the two positions and intensities are strongly correlated");
                break;
            }
        }
    }
}

namespace OrderUnfold.Analysis;

/// <summary>The best alternative placement of one line and its Δχ² against the solution.</summary>
/// <param name="ShiftHz">The shift to the best alternative (NaN when none was tried).</param>
/// <param name="DeltaChiSquare">Δχ² of that placement against the solution (≥ 0; +∞ when none was tried).</param>
internal readonly record struct AlternativePlacement(double ShiftHz, double DeltaChiSquare);

/// <summary>The order check of a refined solution: for each line, its best alternative placement (a near-alias) and
/// Δχ² to it; within the work budget.</summary>
internal sealed class OrderCheck
{
    /// <summary>The best quick-refit candidate gets a full refit when its Δχ² is below this multiple of the doubtful
    /// threshold: the quick refit (other lines fixed) can only overestimate Δχ², and by a factor 4 covers what a full
    /// refit recovered in the cases tried. Chosen, not measured systematically.</summary>
    private const double FullRefitGate = 4;

    /// <summary>The moved line starts its full refit with at least this fraction of its fitted intensity (a quick refit
    /// that drove it to zero would leave it without gradient in its position).</summary>
    private const double MinMovedIntensityFraction = 1e-6;

    /// <summary>Iteration limit of the full refit of an alternative (it starts close to its minimum).</summary>
    private const int FullRefitMaxIterations = 100;

    /// <summary>The full refit counts only when the moved line stays within this many widest linewidths of where the quick
    /// refit put it (otherwise it slid back to another placement, not the one being judged).</summary>
    private const double StayLinewidths = 2;

    private readonly RefinementContext _context;
    private readonly RefinedSolution _solution;
    private readonly List<Instrument> _instruments;
    private readonly (double Start, double End) _window;
    private readonly bool[] _mask;

    private OrderCheck(RefinementContext context, RefinedSolution solution)
    {
        _context = context;
        _solution = solution;
        var grid = context.Grid;
        _instruments = context.Sweeps.Select(s => s.Instrument).DistinctBy(i => i.FsrHz).ToList();
        var origin = grid.Sweeps[0].OffsetHz + solution.AnchorHz; // old relative frequency − origin = new relative frequency
        _window = (grid.Grid.StartHz - origin, grid.Grid.EndHz - origin);
        _mask = solution.FixedMask();
    }

    /// <summary>The best alternative of every line (null: not checked, the budget ran out) and, when the budget stopped
    /// the check, why (a warning is added then).</summary>
    public static (AlternativePlacement?[] Alternatives, string? Stop) Run(RefinementContext context, RefinedSolution solution)
    {
        var check = new OrderCheck(context, solution);
        var budget = context.Budget;
        var lines = solution.Layout.LineCount;
        var alternatives = new AlternativePlacement?[lines];
        for (var j = 0; j < lines; j++)
        {
            budget.Report($"order check: line {j + 1} of {lines}");
            if (budget.Exhausted is not null) break;
            alternatives[j] = check.BestAlternative(j);
            if (budget.Exhausted is not null) alternatives[j] = null; // cut short: not a complete check
        }

        if (budget.Exhausted is null) return (alternatives, null);
        var stop = budget.Exhausted;
        context.Warnings.Add($"the order check stopped: {stop}; {alternatives.Count(a => a is null)} of {lines} line(s) have no order verdict (marked unknown)");
        return (alternatives, stop);
    }

    /// <summary>Shifts Δ that make a line look alike in at least one instrument, ranked by alias margin (smallest first).</summary>
    public static List<double> AliasShifts(IReadOnlyList<Instrument> instruments, double lineHz, (double Start, double End) window, int count)
    {
        var shifts = new List<(double d, double margin)>();
        foreach (var inst in instruments)
        {
            var mMax = (int)Math.Ceiling((window.End - window.Start) / inst.FsrHz);
            for (var m = -mMax; m <= mMax; m++)
            {
                if (m == 0) continue;
                var d = m * inst.FsrHz;
                var target = lineHz + d;
                if (target < window.Start || target > window.End) continue;
                shifts.Add((d, AliasMargin.Margin(instruments, d)));
            }
        }

        return shifts.OrderBy(s => s.margin).Select(s => s.d).Distinct().Take(count).ToList();
    }

    /// <summary>Best alternative placement of line j: each candidate shift gets a quick refit of the moved line's position
    /// and intensity and the backgrounds (other lines fixed); the best one, when it is anywhere near the doubtful threshold,
    /// gets a full Levenberg–Marquardt refit of every parameter. Δχ² is against the solution; NaN both when the budget ran out.</summary>
    private AlternativePlacement BestAlternative(int j)
    {
        var (layout, fit, options, budget) = (_solution.Layout, _solution.Fit, _context.Options, _context.Budget);
        var p = fit.Parameters;
        var nu = p[layout.Position(j)];
        var shifts = AliasShifts(_instruments, nu - _solution.AnchorHz, _window, options.AliasCandidates);
        var bestShift = double.NaN;
        var bestDelta = double.PositiveInfinity;
        var bestNu = double.NaN;
        var bestA = double.NaN;
        var others = p.ToArray();
        others[layout.Intensity(j)] = 0;
        var refit = new MovedLineRefit(_context.Samples, layout, p, j, _context.Samples.Model(layout, others));
        foreach (var d in shifts)
        {
            var (chi, nuMoved, aMoved) = refit.Run(nu + d, budget);
            if (budget.Exhausted is not null) return new AlternativePlacement(double.NaN, double.NaN);
            var delta = chi - fit.ChiSquare;
            if (delta < bestDelta)
            {
                bestDelta = delta;
                bestShift = d;
                bestNu = nuMoved;
                bestA = aMoved;
            }
        }

        if (double.IsFinite(bestDelta) && bestDelta < FullRefitGate * options.DoubtfulDeltaChiSquare)
            bestDelta = FullRefitDelta(j, bestNu, bestA, bestDelta);
        return new AlternativePlacement(bestShift, Math.Max(0, bestDelta));
    }

    /// <summary>Δχ² after a full refit of every parameter from line j moved to <paramref name="movedNu"/>; <paramref name="quickDelta"/>
    /// when that refit does not count (non-finite, or the line slid away).</summary>
    private double FullRefitDelta(int j, double movedNu, double movedIntensity, double quickDelta)
    {
        var (layout, fit, options) = (_solution.Layout, _solution.Fit, _context.Options);
        var q = fit.Parameters.ToArray();
        q[layout.Position(j)] = movedNu;
        q[layout.Intensity(j)] = Math.Max(movedIntensity, MinMovedIntensityFraction * Math.Abs(fit.Parameters[layout.Intensity(j)]));
        var m = (bool[])_mask.Clone();
        m[layout.Position(j)] = false;
        var request = new LineFitRequest(Math.Min(options.MaxIterations, FullRefitMaxIterations), m, _context.Budget);
        var alt = LineFitter.Fit(_context.Samples, layout, q, request);
        var lw = _context.WidestLinewidthHz;
        if (double.IsFinite(alt.ChiSquare) && Math.Abs(alt.Parameters[layout.Position(j)] - movedNu) < StayLinewidths * lw && alt.ChiSquare - fit.ChiSquare < quickDelta)
            return alt.ChiSquare - fit.ChiSquare;
        return quickDelta;
    }
}

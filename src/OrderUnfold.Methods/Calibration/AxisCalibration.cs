using OrderUnfold.Instruments;
using OrderUnfold.Units;

namespace OrderUnfold.Calibration;

/// <summary>
/// A calibrated sweep axis for one instrument and ramp direction.
/// </summary>
/// <param name="Instrument">Instrument name.</param>
/// <param name="Direction">Ramp direction it applies to.</param>
/// <param name="Source">File or sweep it came from.</param>
/// <param name="Method">How it was obtained ("calibration sweep", …).</param>
/// <param name="Axis">f(x) in Hz (for the source's wavelength).</param>
/// <param name="PointX">Scan coordinate of each calibration point.</param>
/// <param name="PointHz">Frequency assigned to each point.</param>
/// <param name="ResidualHz">Fit residual at each point, Hz.</param>
/// <param name="ResidualRmsHz">RMS of the residuals, Hz.</param>
/// <param name="Finesse">Effective finesse measured from the peak widths, when measurable.</param>
/// <param name="FinesseSigma">Standard error of that finesse.</param>
/// <param name="Warnings">What looked wrong.</param>
public sealed record AxisCalibration(
    string Instrument,
    RampDirection Direction,
    string Source,
    string Method,
    AxisPolynomial Axis,
    double[] PointX,
    double[] PointHz,
    double[] ResidualHz,
    double ResidualRmsHz,
    double? Finesse,
    double? FinesseSigma,
    IReadOnlyList<string> Warnings)
{
    /// <summary>Number of calibration points the axis was fitted to.</summary>
    public int PointCount => PointX.Length;

    /// <summary>True when the axis was fitted to repeats of the source one FSR apart (self-calibration).</summary>
    public bool FromRepeats { get; init; }

    /// <summary>Constraints (repeat pairs and calibration intervals) used by a self-calibration.</summary>
    public int PairsUsed { get; init; }

    /// <summary>Constraints rejected as outliers by a self-calibration.</summary>
    public int PairsRejected { get; init; }

    /// <summary>RMS standard uncertainty of the axis shape over the calibrated range (additive constant removed), Hz, when estimated.</summary>
    public double? AxisSigmaHz { get; init; }

    /// <summary>
    /// Covariance (row-major d × d, Hz²) of the shape coefficients c₁…c_d of <see cref="Axis"/> (its constant left out,
    /// which the sweep origin absorbs), from the scatter of the calibration points about the fit; null when unknown.
    /// The line refinement propagates it into the line frequencies.
    /// </summary>
    public double[]? ShapeCovariance { get; init; }

    /// <summary>The Airy fits behind <see cref="Finesse"/> when the finesse was fitted to isolated peaks.</summary>
    public FinesseEstimate? FinesseDetail { get; init; }

    /// <summary>How the period (FSR in scan units) was decided from the peak pattern, with the candidates and the cavity's
    /// transverse families; null when the axis was not decided that way.</summary>
    public PeriodDecision? PeriodDecision { get; init; }

    /// <summary>Transverse families of the cavity found with the period (offsets measured); empty when none.</summary>
    public IReadOnlyList<CavityModeFamily> Families => PeriodDecision?.Families ?? [];

    /// <summary>True when <see cref="Finesse"/> was measured from the peaks (false: none measured here).</summary>
    public bool FinesseMeasured => Finesse is not null;

    /// <summary>Transverse-mode families seen in a calibration sweep, when checked.</summary>
    public TransverseModeReport? TransverseModes { get; init; }

    /// <summary>
    /// The instrument FSR (Hz, at the source's wavelength) that the frequencies of this axis were built at: <see cref="Axis"/>
    /// divided by it is the axis in units of the period (fractions of an FSR), which is what the peaks and repeats measure.
    /// Calibration builds every axis at the stated FSR and leaves it there, whatever the period decision found; the settlement
    /// converts it to the FSR it decided, once (<see cref="AtFsr"/>). Null for an axis that states none (a hand-built one).
    /// </summary>
    public double? BuiltAtFsrHz { get; init; }

    /// <summary>The FSR this axis's own period decision implies (<see cref="BuiltAtFsrHz"/> times the decided multiple of the
    /// period the repeats were fitted at; the decided period itself when the repeats were fitted at the built-at FSR); null
    /// without a decision or a built-at FSR.</summary>
    public double? DecidedFsrHz => PeriodDecision is { } d && BuiltAtFsrHz is double built
        ? (d.StatedFsrHz == built ? d.PeriodHz : built * (d.PeriodHz / d.StatedFsrHz))
        : null;

    /// <summary>
    /// The axis with one period standing for <paramref name="fsrHz"/>: every frequency (the polynomial, the points, the
    /// residuals, the shape uncertainty) converted from the FSR it was built at. The settlement's one conversion of an axis
    /// to the FSR it decided; the axis itself (the same object) when that is the FSR it was built at.
    /// </summary>
    /// <param name="fsrHz">The decided FSR, Hz.</param>
    /// <param name="statedFsrHz">The FSR an axis that states no <see cref="BuiltAtFsrHz"/> was built at (its instrument's).</param>
    public AxisCalibration AtFsr(double fsrHz, double statedFsrHz)
    {
        var built = BuiltAtFsrHz ?? statedFsrHz;
        return fsrHz == built ? this : Scaled(fsrHz / built) with { BuiltAtFsrHz = fsrHz };
    }

    private AxisCalibration Scaled(double factor) => this with
    {
        Axis = Axis.Scaled(factor),
        PointHz = PointHz.Select(v => v * factor).ToArray(),
        ResidualHz = ResidualHz.Select(v => v * factor).ToArray(),
        ResidualRmsHz = ResidualRmsHz * factor,
        AxisSigmaHz = AxisSigmaHz * factor,
        ShapeCovariance = ShapeCovariance?.Select(v => v * factor * factor).ToArray(),
    };
}

/// <summary>Builds sweep axes from calibration sweeps (a single-frequency laser through the same cavity and ramp).</summary>
public static class AxisCalibrator
{
    /// <summary>Largest polynomial degree tried when the degree is chosen from the data.</summary>
    public const int MaxAutoDegree = 5;

    /// <summary>
    /// Finds the peaks of a calibration sweep (one FSR apart), numbers them by order, and fits a monotone
    /// polynomial f(x) with f(x_p) = ±p·FSR·(λ_cal/λ_source). The degree is chosen by the Bayesian information
    /// criterion among monotone fits with at least one degree of freedom, unless given.
    /// </summary>
    /// <param name="sweep">Calibration sweep (x relative to the segment start for time scans).</param>
    /// <param name="instrument">The cavity.</param>
    /// <param name="degree">Polynomial degree, or null to choose it.</param>
    /// <param name="wavelengthRatio">λ_calibration / λ_source: one calibration FSR of mirror travel moves the source's comb by this many FSRs.</param>
    public static AxisCalibration FromCalibrationSweep(Sweep sweep, Instrument instrument, int? degree = null, double wavelengthRatio = 1.0)
    {
        var peaks = PeakFinder.Find(sweep.X, sweep.Y, minHeightFraction: 0.3, minSnr: 5);
        if (peaks.Count == 0)
            throw new InputException($"no calibration peaks found in {sweep.Name}: expected a single-frequency laser's transmission peaks, one per FSR; check the signal column and that the laser was locked through the sweep", sweep.Source);
        if (peaks.Count == 1)
            throw new InputException($"only one calibration peak found in {sweep.Name}: the sweep must cover more than one FSR ({Quantity.FormatFrequency(instrument.FsrHz)}) to calibrate the axis", sweep.Source);

        var warnings = new List<string>();
        var sign = sweep.Direction == RampDirection.Down && sweep.Scan == ScanCoordinate.Time ? -1.0 : 1.0;
        var ordered = TallestClass(sweep, peaks.OrderBy(p => p.X).ToList(), warnings);
        var orders = NumberOrders(ordered, warnings);
        var fsr = instrument.FsrHz * wavelengthRatio;
        var px = ordered.Select(p => p.X).ToArray();
        var pf = orders.Select(o => sign * o * fsr).ToArray();
        var n = px.Length;
        var best = degree is int d ? FixedDegreeAxis(sweep, px, pf, d) : LowestBicAxis(sweep, px, pf, fsr, warnings);
        var residuals = new double[n];
        for (var i = 0; i < n; i++) residuals[i] = pf[i] - best.Evaluate(px[i]);
        var rms = Math.Sqrt(residuals.Sum(r => r * r) / n);
        var (finesse, finesseSigma) = WidthFinesse(sweep, instrument, ordered, best, wavelengthRatio, warnings);
        var shapeCovariance = best.ShapeCovariance(px, pf);
        return new AxisCalibration(instrument.Name, sweep.Direction, sweep.Name, "calibration sweep", best, px, pf, residuals, rms,
            finesse, finesseSigma, warnings)
        {
            BuiltAtFsrHz = instrument.FsrHz,
            ShapeCovariance = shapeCovariance,
            AxisSigmaHz = shapeCovariance is null ? null : AxisPolynomial.ShapeSigmaRms(shapeCovariance, best.Degree),
        };
    }

    /// <summary>
    /// A transverse family as tall as a third of TEM00 puts its own peak between the orders: the peaks are then k
    /// interleaved classes, each one FSR apart, and taking consecutive peaks as consecutive orders would make the FSR in
    /// scan units 1/k of the truth (a factor-2 error of the whole frequency scale for a near-confocal cavity). Returns the
    /// tallest class (all peaks when they are one class).
    /// </summary>
    private static List<Peak> TallestClass(Sweep sweep, List<Peak> ordered, List<string> warnings)
    {
        var interleaved = InterleavedClasses(ordered);
        if (interleaved <= 1) return ordered;
        var classes = Enumerable.Range(0, interleaved).Select(c => ordered.Where((_, i) => i % interleaved == c).ToList()).ToList();
        var kept = classes.MaxBy(c => c.Average(p => p.Height))!;
        warnings.Add($"{sweep.Name}: the calibration peaks form {interleaved} interleaved groups of different heights (" +
                     string.Join(", ", classes.Select(c => $"{c.Average(p => p.Height) / kept.Average(p => p.Height):P0}")) +
                     "): the cavity's transverse families put their own peaks between the orders, so each group repeats once per FSR; " +
                     $"the tallest group ({kept.Count} peaks) calibrates the axis (improve the alignment of the calibration laser to lower the others)");
        return kept;
    }

    /// <summary>Order numbers of the peaks from their spacings in units of the typical (upper median) spacing; a gap of
    /// several spacings skips orders, with a warning.</summary>
    private static int[] NumberOrders(List<Peak> ordered, List<string> warnings)
    {
        var spacings = new List<double>();
        for (var i = 1; i < ordered.Count; i++) spacings.Add(ordered[i].X - ordered[i - 1].X);
        var typical = Medians.Upper(spacings);
        var orders = new int[ordered.Count];
        for (var i = 1; i < ordered.Count; i++)
        {
            var ratio = spacings[i - 1] / typical;
            var step = Math.Max(1, (int)Math.Round(ratio));
            if (Math.Abs(ratio - step) > 0.3)
                warnings.Add($"calibration peaks at x = {ordered[i - 1].X:G6} and {ordered[i].X:G6} are {ratio:F2} typical spacings apart: an extra or missing peak (transverse mode? mode hop?)");
            if (step > 1) warnings.Add($"{step - 1} calibration peak(s) missing between x = {ordered[i - 1].X:G6} and {ordered[i].X:G6}");
            orders[i] = orders[i - 1] + step;
        }

        return orders;
    }

    private static AxisPolynomial FixedDegreeAxis(Sweep sweep, double[] px, double[] pf, int d)
    {
        if (d < 1) throw new InputException($"axis degree must be at least 1 but got {d}");
        if (px.Length < d + 1)
            throw new InputException($"{sweep.Name}: {px.Length} calibration peaks are too few for a degree-{d} axis (needs at least {d + 1}); lower axis_degree or sweep over more FSRs", sweep.Source);
        var axis = AxisPolynomial.Fit(px, pf, d);
        if (!axis.IsMonotone(sweep.X.Min(), sweep.X.Max()))
            throw new InputException($"{sweep.Name}: the fitted degree-{d} axis is not monotone over the sweep; lower axis_degree", sweep.Source);
        return axis;
    }

    /// <summary>The monotone axis with the lowest Bayesian information criterion (residuals floored at 10⁻⁵ FSR).</summary>
    private static AxisPolynomial LowestBicAxis(Sweep sweep, double[] px, double[] pf, double fsr, List<string> warnings)
    {
        var n = px.Length;
        AxisPolynomial? best = null;
        var floor = 1e-5 * fsr;
        var bestBic = double.PositiveInfinity;
        // three peaks (two FSRs) already show the piezo's curvature: a quadratic through them gives each interval its
        // own FSR in scan units, where a line would force one mean spacing on both (without a degree of freedom left)
        var maxDegree = Math.Min(MaxAutoDegree, n == 3 ? 2 : n - 2);
        for (var deg = 1; deg <= Math.Max(1, maxDegree); deg++)
        {
            var fit = AxisPolynomial.Fit(px, pf, deg);
            if (!fit.IsMonotone(sweep.X.Min(), sweep.X.Max())) continue;
            var rss = 0.0;
            for (var i = 0; i < n; i++) rss += Math.Pow(pf[i] - fit.Evaluate(px[i]), 2);
            rss = Math.Max(rss, n * floor * floor);
            var bic = n * Math.Log(rss / n) + (deg + 1) * Math.Log(n);
            if (bic < bestBic - 1e-9)
            {
                bestBic = bic;
                best = fit;
            }
        }

        if (best is null)
            throw new InputException($"{sweep.Name}: no monotone axis polynomial fits the calibration peaks; the peaks may not be one FSR apart", sweep.Source);
        if (n <= 3)
            warnings.Add($"{sweep.Name}: only {n} calibration peaks: the axis is at most linear-plus-one-term and a non-linear piezo is not fully corrected; sweep over more FSRs or use self-calibration");
        return best;
    }

    /// <summary>Effective finesse from the peak widths on the fitted axis: the (upper) median, with the standard error of
    /// the mean as its σ; null without a usable width.</summary>
    private static (double? Finesse, double? Sigma) WidthFinesse(Sweep sweep, Instrument instrument, List<Peak> ordered, AxisPolynomial axis,
        double wavelengthRatio, List<string> warnings)
    {
        var finesses = new List<double>();
        foreach (var p in ordered)
        {
            var i = (int)Math.Clamp(Math.Round(p.Position), 1, sweep.X.Length - 2);
            var dxdi = Math.Abs(sweep.X[i + 1] - sweep.X[i - 1]) / 2;
            var fwhmHz = p.WidthSamples * dxdi * Math.Abs(axis.Derivative(p.X)) / wavelengthRatio;
            if (fwhmHz > 0 && fwhmHz < instrument.FsrHz / 2) finesses.Add(Airy.FinesseFromFwhm(instrument.FsrHz, fwhmHz));
        }

        if (finesses.Count == 0) return (null, null);
        var sorted = finesses.OrderBy(v => v).ToList();
        double? finesseSigma = null;
        if (sorted.Count > 1)
        {
            var mean = sorted.Average();
            finesseSigma = Math.Sqrt(sorted.Sum(v => (v - mean) * (v - mean)) / (sorted.Count - 1) / sorted.Count);
        }

        var samplesPerFwhm = ordered.Average(p => p.WidthSamples);
        if (samplesPerFwhm < 4)
            warnings.Add($"{sweep.Name}: calibration peaks are only {samplesPerFwhm:F1} samples wide; the measured finesse is unreliable (sample faster or sweep fewer FSRs)");
        return (Medians.Upper(sorted), finesseSigma);
    }

    /// <summary>Heights of one class of peaks of a single-frequency laser agree within this relative standard deviation.</summary>
    public const double ClassHeightScatter = 0.1;

    /// <summary>
    /// The number k (1 to 3) of interleaved peak classes in a calibration sweep: the smallest k for which the peaks taken
    /// every k-th form classes of nearly equal height each (relative scatter below <see cref="ClassHeightScatter"/>, at least
    /// two peaks per class) whose mean heights differ by more than 15 % from one another, and whose spacings repeat with
    /// period k while differing within it. 1 when the heights all agree, or when no k explains them (a drifting laser power
    /// changes every class alike; then the spacings decide as before).
    /// </summary>
    public static int InterleavedClasses(IReadOnlyList<Peak> ordered)
    {
        static double Scatter(IReadOnlyList<double> h)
        {
            var mean = h.Average();
            return h.Count < 2 || !(mean > 0) ? double.PositiveInfinity : Math.Sqrt(h.Sum(v => (v - mean) * (v - mean)) / (h.Count - 1)) / mean;
        }

        var heights = ordered.Select(p => p.Height).ToList();
        if (Scatter(heights) <= ClassHeightScatter) return 1;
        for (var k = 2; k <= 3; k++)
        {
            if (heights.Count < 2 * k) break;
            var classes = Enumerable.Range(0, k).Select(c => heights.Where((_, i) => i % k == c).ToList()).ToList();
            if (classes.Any(c => Scatter(c) > ClassHeightScatter)) continue;
            // the spacings must show the pattern too (a family off half the FSR makes them alternate short and long): heights
            // that alternate at even spacings are also what a confocal cavity stated at c/4L shows (its odd family coincides
            // with the next order, every peak is one FSR), and a family at exactly half the FSR of a planar cavity is left
            // to the check that refits the axis to repeats (CalibrationSteps.DescribeCalibrationSweep)
            if (!SpacingsRepeat(ordered, k)) continue;
            var means = classes.Select(c => c.Average()).OrderBy(v => v).ToList();
            var distinct = true;
            for (var i = 1; i < means.Count; i++)
                if (means[i - 1] > 0.85 * means[i]) distinct = false;
            if (distinct) return k;
        }

        return 1;
    }

    /// <summary>True when consecutive peak spacings repeat with period k but differ within it by more than a tenth of the
    /// mean spacing (for k = 2: short, long, short, …).</summary>
    private static bool SpacingsRepeat(IReadOnlyList<Peak> ordered, int k)
    {
        var s = new List<double>();
        for (var i = 1; i < ordered.Count; i++) s.Add(ordered[i].X - ordered[i - 1].X);
        if (s.Count < k + 1) return false;
        var mean = s.Average(v => Math.Abs(v));
        for (var i = 0; i + 1 < s.Count; i++)
            if (Math.Abs(s[i + 1] - s[i]) < 0.1 * mean) return false;
        for (var i = 0; i + k < s.Count; i++)
            if (Math.Abs(s[i + k] - s[i]) > 0.5 * Math.Abs(s[i + 1] - s[i])) return false;
        return true;
    }
}

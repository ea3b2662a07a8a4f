
namespace OrderUnfold.Calibration;

/// <summary>Options of <see cref="RingdownHandling"/>.</summary>
public sealed record RingdownOptions
{
    /// <summary>Sample interval, s; null: taken from x when the sweep's scan coordinate is time, else unknown
    /// (then times come out in samples and the finesse needs the calibrated axis, see <see cref="RingdownHandling.Annotate"/>).</summary>
    public double? SampleIntervalS { get; init; }

    /// <summary>Tallest peaks examined for ring-down.</summary>
    public int PeaksExamined { get; init; } = 3;

    /// <summary>Smallest π²·r·τ² (sweep rate over linewidth²) that counts as a dynamic sweep.</summary>
    public double MinDynamics { get; init; } = 0.5;

    /// <summary>Fewest ringing maxima after a peak's top that count as ringing.</summary>
    public int MinLobes { get; init; } = 2;

    /// <summary>Peaks below this height-to-noise ratio are left as they are.</summary>
    public double MinSnr { get; init; } = 8;

    /// <summary>Peaks below this height-to-noise ratio are fitted with τ held at the sweep's common value.</summary>
    public double FreeTauSnr { get; init; } = 30;

    /// <summary>Most peaks fitted per sweep (bounds the cost).</summary>
    public int MaxPeaks { get; init; } = 200;

    /// <summary>Ring-down found in another sweep of the same record (see <see cref="RingdownHandling.PrepareAll"/>): when set and
    /// detected, this sweep is treated as ringing with that decay time without checking its own (possibly few or weak) peaks.</summary>
    public RingdownEvidence? Assume { get; init; }
}

/// <summary>What the ring-down check saw on one examined peak.</summary>
/// <param name="Top">Sample of the peak's top.</param>
/// <param name="TrailingLobes">Ringing maxima after the top (in time) that each stand out of the noise.</param>
/// <param name="LeadingLobes">The same before the top.</param>
/// <param name="LobeSpacings">Samples between the top and the first ringing maximum, then between successive ones (on the ringing side).</param>
/// <param name="Chirped">True when the spacings shrink away from the peak.</param>
/// <param name="Fit">The swept-cavity fit (null when it failed).</param>
/// <param name="Ringing">True when this peak shows ring-down by every criterion.</param>
public sealed record RingdownPeakCheck(int Top, int TrailingLobes, int LeadingLobes, IReadOnlyList<int> LobeSpacings, bool Chirped, RingdownPeakFit? Fit, bool Ringing);

/// <summary>The evidence for or against ring-down in one sweep.</summary>
/// <param name="Detected">True when the sweep rings down.</param>
/// <param name="Side">"trailing" (after each peak in time, as physics requires), "leading" (the record runs backwards in time) or "none".</param>
/// <param name="Checks">The examined peaks.</param>
/// <param name="TauSamples">Field decay time τ from the examined peaks (weighted mean), samples; NaN when not measured.</param>
/// <param name="TauSigmaSamples">Its standard error (the larger of the fit errors and the scatter between peaks).</param>
/// <param name="RateSamples">Median sweep rate at the peaks, cycles per sample².</param>
/// <param name="Dynamics">Median π²·r·τ² (sweep rate over linewidth squared).</param>
/// <param name="SampleIntervalS">Sample interval used for the values in seconds, when known.</param>
/// <param name="Summary">One line saying what was found and why.</param>
public sealed record RingdownEvidence(bool Detected, string Side, IReadOnlyList<RingdownPeakCheck> Checks, double TauSamples, double TauSigmaSamples,
    double RateSamples, double Dynamics, double? SampleIntervalS, string Summary)
{
    /// <summary>Field (amplitude) 1/e decay time, s, when the sample interval is known.</summary>
    public double? TauFieldS => SampleIntervalS is double dt && double.IsFinite(TauSamples) ? TauSamples * dt : null;

    /// <summary>Standard error of <see cref="TauFieldS"/>.</summary>
    public double? TauFieldSigmaS => SampleIntervalS is double dt && double.IsFinite(TauSigmaSamples) ? TauSigmaSamples * dt : null;

    /// <summary>Median sweep rate at the peaks, Hz/s, when the sample interval is known.</summary>
    public double? SweepRateHzPerS => SampleIntervalS is double dt && double.IsFinite(RateSamples) ? RateSamples / (dt * dt) : null;

    /// <summary>Cavity linewidth 1/(π·τ_field), Hz, when the sample interval is known.</summary>
    public double? LinewidthHz => TauFieldS is double t ? 1 / (Math.PI * t) : null;
}

/// <summary>The result of <see cref="RingdownHandling.Prepare(Sweep, RingdownOptions?)"/>.</summary>
/// <param name="Method">Which treatment was applied (see <see cref="RingdownHandling"/>).</param>
/// <param name="Sweep">The sweep for peak finding: the input when no ring-down was found, else the same sweep with the corrected signal.</param>
/// <param name="Evidence">What the check saw.</param>
/// <param name="Peaks">Every peak fitted with the swept-cavity model (empty without ring-down), in time order.</param>
/// <param name="Crossings">The fitted peaks as <see cref="Peak"/>s at their resonance crossings (static height and FWHM), for the axis calibration.</param>
/// <param name="Warnings">What looked wrong.</param>
public sealed record RingdownPreparation(string Method, Sweep Sweep, RingdownEvidence Evidence, IReadOnlyList<RingdownPeakFit> Peaks, IReadOnlyList<Peak> Crossings,
    IReadOnlyList<string> Warnings)
{
    /// <summary>True when the signal was corrected.</summary>
    public bool Corrected => Peaks.Count > 0;
}

/// <summary>The cavity finesse read from the ring-down on a calibrated axis.</summary>
/// <param name="Finesse">π·FSR·τ_field (weighted mean over the peaks fitted with τ free).</param>
/// <param name="Sigma">Its standard error (the larger of the fit errors and the scatter between peaks).</param>
/// <param name="TauFieldS">Field decay time, s.</param>
/// <param name="TauFieldSigmaS">Its standard error, s.</param>
/// <param name="LinewidthHz">1/(π·τ_field), Hz.</param>
/// <param name="StaticWidthFinesse">FSR over the measured (ring-down broadened) peak width: what a static reading of the width gives.</param>
/// <param name="SampleIntervalS">Sample interval used (stated, or chirp rate over the axis slope).</param>
/// <param name="SweepRateHzPerS">Median sweep rate at the peaks, Hz/s.</param>
/// <param name="PeaksUsed">Peaks that entered the mean.</param>
/// <param name="ChirpIntervalS">Sample interval implied by the fitted chirp rate over the axis slope (median over the peaks), s. When the
/// interval is also stated, their ratio checks the axis scale: a wrong period (half or double the FSR) shows as a factor 2.</param>
public sealed record RingdownFinesse(double Finesse, double Sigma, double TauFieldS, double TauFieldSigmaS, double LinewidthHz, double StaticWidthFinesse,
    double SampleIntervalS, double SweepRateHzPerS, int PeaksUsed, double ChirpIntervalS);

/// <summary>
/// Cavity ring-down in fast sweeps: recognises it, fits it, and hands the peak finding a signal without the ringing.
/// <para>
/// <b>Recognition.</b> The tallest peaks (up to <see cref="RingdownOptions.PeaksExamined"/>) are each checked for an
/// oscillation on one side only whose maxima stand out of the noise, come closer together away from the peak (the
/// detuning grows linearly with time, so the beat between the decaying field and the drive is chirped) and decay;
/// and each is fitted with the swept-cavity model of <see cref="RingdownModel"/>, which must give a dynamic sweep
/// (π²·r·τ² ≥ <see cref="RingdownOptions.MinDynamics"/>) and fit clearly better (χ² at least 1.5 times smaller) than a static Lorentzian.
/// Ring-down is declared when most of the examined peaks pass every test.
/// </para>
/// <para>
/// <b>Method used: model fit and static replacement.</b> When ring-down is found, every peak above
/// <see cref="RingdownOptions.MinSnr"/> is fitted with the swept-cavity model (tallest first, each fit on the signal
/// with the peaks fitted so far subtracted, then a second round with all the others subtracted; weak peaks with τ held
/// at the common value). The signal handed on is the measured one with each fitted swept response replaced by the
/// static Lorentzian it stands for (same background and static height, centred on the resonance crossing, FWHM =
/// linewidth / sweep rate); the fit residual is kept, so noise and anything the model misses stay in the data. Peak
/// finding on it sees one peak per resonance at the crossing (not at the delayed maximum) with the static width, and
/// the ringing is never counted as peaks. No smoothing is applied.
/// </para>
/// </summary>
public static class RingdownHandling
{
    /// <summary>Checks a sweep for ring-down and, when found, corrects its signal for peak finding (see the class remarks).
    /// Without ring-down the sweep is returned unchanged (Method "none").</summary>
    public static RingdownPreparation Prepare(Sweep sweep, RingdownOptions? options = null) => Prepare(sweep, options, null);

    private static RingdownPreparation Prepare(Sweep sweep, RingdownOptions? options, RingdownEvidence? detected)
    {
        ArgumentNullException.ThrowIfNull(sweep);
        options ??= new RingdownOptions();
        var evidence = detected ?? Detect(sweep, options);
        if (!evidence.Detected && options.Assume is { Detected: true } assumed)
            evidence = assumed with
            {
                Checks = evidence.Checks,
                SampleIntervalS = evidence.SampleIntervalS ?? assumed.SampleIntervalS,
                Summary = $"ring-down taken from another sweep of the record ({assumed.Summary}); this sweep alone: {evidence.Summary}",
            };
        if (!evidence.Detected)
            return new RingdownPreparation("none (no ring-down found)", sweep, evidence, [], [], []);

        var reversed = evidence.Side == "leading";
        var y = Oriented(sweep.Y, reversed);
        var noise = NoiseEstimator.FirstDifferenceSigma(y);
        var warnings = new List<string>();
        var fits = FitAll(y, noise, evidence.TauSamples, options, warnings, sweep.Name);

        // the decay time and rate of the evidence from the final fits, in which every neighbour is subtracted
        var free = fits.Where(f => !f.TauFixed && double.IsFinite(f.TauSigma) && f.TauSigma < 0.3 * f.Tau).ToList();
        if (free.Count > 0)
        {
            var (tau, tauSigma) = WeightedMean(free.Select(f => (f.Tau, f.TauSigma)).ToList());
            evidence = evidence with
            {
                TauSamples = tau,
                TauSigmaSamples = tauSigma,
                RateSamples = Medians.OfFinite(free.Select(f => f.Rate)),
                Dynamics = Medians.OfFinite(free.Select(f => f.Dynamics)),
            };
            var inSeconds = evidence.TauFieldS is double ts ? $" = {ts * 1e9:G4} ± {evidence.TauFieldSigmaS!.Value * 1e9:G2} ns" : "";
            evidence = evidence with
            {
                Summary = evidence.Summary + $"; with every peak fitted and its neighbours subtracted ({free.Count} with τ free): τ = {tau:G4} ± {tauSigma:G2} samples{inSeconds}, " +
                          $"sweep rate / linewidth² = {evidence.Dynamics:G3}",
            };
        }

        var corrected = (double[])y.Clone();
        var dyn = new double[RingdownFit.MaxWindow];
        foreach (var f in fits)
        {
            var span = dyn.AsSpan(0, f.WindowCount);
            RingdownModel.Power(span, f.WindowStart, f.Crossing, f.Tau, f.Rate);
            var w = f.StaticFwhm;
            for (var i = 0; i < f.WindowCount; i++)
            {
                var n = f.WindowStart + i;
                corrected[n] += f.Amplitude * (RingdownModel.Lorentzian(n, f.Crossing, w) - span[i]);
            }
        }

        var signal = Oriented(corrected, reversed);
        var count = y.Length;
        var peaks = fits.Select(f => reversed ? Mirror(f, count) : f).OrderBy(f => f.Crossing).ToList();
        var crossings = peaks.Select(f => new Peak(f.Crossing, PeakFinder.Interpolate(sweep.X, Math.Clamp(f.Crossing, 0, count - 1)), f.Amplitude, f.StaticFwhm)).ToList();
        if (reversed)
            warnings.Add($"{sweep.Name}: the ringing comes before the peaks: the record seems to run backwards in time; it was fitted reversed");
        var method = $"swept-cavity model fit ({peaks.Count} peaks): each swept response replaced by its static Lorentzian at the resonance crossing, fit residual kept";
        return new RingdownPreparation(method, sweep with { Y = signal }, evidence, peaks, crossings, warnings);
    }

    /// <summary>
    /// Prepares the sweeps of one record (the halves of a triangle ramp): each is checked on its own; when at least half of
    /// the sweeps with peaks tall enough to judge ring down, the others are treated as ringing too, with the decay time of
    /// the best-measured one (a short end segment may hold a single weak peak whose ringing cannot be judged alone).
    /// </summary>
    public static IReadOnlyList<RingdownPreparation> PrepareAll(IReadOnlyList<Sweep> sweeps, RingdownOptions? options = null)
    {
        ArgumentNullException.ThrowIfNull(sweeps);
        options ??= new RingdownOptions();
        var evidence = sweeps.Select(s => Detect(s, options)).ToList();
        var judged = evidence.Count(e => e.Checks.Count > 0);
        var detected = evidence.Where(e => e.Detected).ToList();
        var shared = detected.Count > 0 && 2 * detected.Count >= judged ? detected.MinBy(e => e.TauSigmaSamples / e.TauSamples) : null;
        return sweeps.Select((s, i) => Prepare(s, shared is null ? options : options with { Assume = shared }, evidence[i])).ToList();
    }

    /// <summary>The ring-down check alone (cost: a few fits of the tallest peaks).</summary>
    public static RingdownEvidence Detect(Sweep sweep, RingdownOptions? options = null)
    {
        ArgumentNullException.ThrowIfNull(sweep);
        options ??= new RingdownOptions();
        var dt = options.SampleIntervalS ?? (sweep.Scan == ScanCoordinate.Time && sweep.Count > 1 ? Math.Abs(sweep.X[^1] - sweep.X[0]) / (sweep.Count - 1) : null);
        var y = sweep.Y;
        if (y.Length < 64)
            return new RingdownEvidence(false, "none", [], double.NaN, double.NaN, double.NaN, double.NaN, dt, "too few samples to check for ring-down");
        var noise = NoiseEstimator.FirstDifferenceSigma(y);
        var baseline = PeakFinder.Percentile(y, 0.05);
        var tops = TallestTops(y, baseline, noise, options.PeaksExamined);
        if (tops.Count == 0)
            return new RingdownEvidence(false, "none", [], double.NaN, double.NaN, double.NaN, double.NaN, dt, "no peak tall enough (20 σ) to check for ring-down");

        // which side rings: count lobes on both sides first; a record running backwards in time rings before its peaks
        var lobes = tops.Select(t => (Top: t, Trailing: Lobes(y, t.Top, t.Fwhm, baseline, noise, +1), Leading: Lobes(y, t.Top, t.Fwhm, baseline, noise, -1))).ToList();
        var reversed = lobes.Count(l => l.Leading.Count >= options.MinLobes && l.Trailing.Count < options.MinLobes) > lobes.Count / 2;
        var yy = Oriented(y, reversed);
        var checks = new List<RingdownPeakCheck>();
        foreach (var l in lobes)
        {
            var top = reversed ? y.Length - 1 - l.Top.Top : l.Top.Top;
            var ringing = reversed ? l.Leading : l.Trailing;
            var other = reversed ? l.Trailing : l.Leading;
            var spacings = Spacings(top, ringing, reversed);
            // chirped: the spacings never grow and the last is clearly shorter than the first (equal spacings are a comb of lines)
            var chirped = spacings.Count >= 2 && Enumerable.Range(1, spacings.Count - 1).All(k => spacings[k] <= spacings[k - 1])
                          && spacings[^1] < 0.85 * spacings[0];
            var (start, end) = RingdownFit.Window(yy.Length, top, l.Top.Fwhm);
            var fit = RingdownFit.Fit(yy, start, end, top, l.Top.Fwhm, noise);
            var ok = fit is not null
                     && ringing.Count >= options.MinLobes && other.Count < options.MinLobes && chirped
                     && fit.Dynamics >= options.MinDynamics
                     && fit.StaticChiSquareRatio >= 1.5
                     && double.IsFinite(fit.TauSigma) && fit.TauSigma < 0.3 * fit.Tau;
            if (fit is not null && reversed) fit = Mirror(fit, y.Length);
            checks.Add(new RingdownPeakCheck(l.Top.Top, l.Trailing.Count, l.Leading.Count, spacings, chirped, fit, ok));
        }

        var passing = checks.Where(c => c.Ringing).ToList();
        var detected = passing.Count >= Math.Max(1, (checks.Count + 1) / 2) && (checks.Count == 1 || passing.Count >= 2);
        var side = detected ? (reversed ? "leading" : "trailing") : "none";
        var (tau, tauSigma) = WeightedMean(passing.Select(c => (c.Fit!.Tau, c.Fit.TauSigma)).ToList());
        var rate = Medians.OfFinite(passing.Select(c => c.Fit!.Rate));
        var dynamics = Medians.OfFinite(passing.Select(c => c.Fit!.Dynamics));
        if (!detected)
        {
            var all = checks.Where(c => c.Fit is not null).ToList();
            rate = Medians.OfFinite(all.Select(c => c.Fit!.Rate));
            dynamics = Medians.OfFinite(all.Select(c => c.Fit!.Dynamics));
        }

        string summary;
        if (detected)
        {
            var inSeconds = dt is double d ? $" = {tau * d * 1e9:G4} ns ± {tauSigma * d * 1e9:G2} ns" : "";
            summary = $"ring-down on the {side} side of {passing.Count} of {checks.Count} examined peaks: chirped, decaying ringing; " +
                      $"field decay time {tau:G4} ± {tauSigma:G2} samples{inSeconds}, sweep rate / linewidth² = {dynamics:G3}";
        }
        else
        {
            var why = checks.Select(c => c.Fit is null ? "fit failed"
                : $"{c.TrailingLobes}/{c.LeadingLobes} ringing maxima after/before{(c.Chirped ? " (chirped)" : "")}, π²rτ² = {c.Fit.Dynamics:G2}, τ = {c.Fit.Tau:G3} ± {c.Fit.TauSigma:G2} samples, static/dynamic χ² = {c.Fit.StaticChiSquareRatio:G3}");
            summary = $"no ring-down: {string.Join("; ", why)}";
        }

        return new RingdownEvidence(detected, side, checks, detected ? tau : double.NaN, detected ? tauSigma : double.NaN, rate, dynamics, dt, summary);
    }

    /// <summary>
    /// The finesse from the ring-down of a prepared sweep on a calibrated axis: F = π·FSR·τ_field with τ_field in seconds.
    /// The sample interval is the stated one when known, else the fitted chirp rate over the axis slope at each peak
    /// (r [cycles/sample²] divided by dν/dn [Hz/sample]), so the axis scale (and with it the period decision) enters.
    /// Null when there was no ring-down or no peak with a free τ.
    /// </summary>
    /// <param name="preparation">The result of <see cref="Prepare(Sweep, RingdownOptions?)"/>.</param>
    /// <param name="axis">The calibrated axis of the sweep (x → Hz).</param>
    /// <param name="fsrHz">The FSR (the period of the axis), Hz.</param>
    public static RingdownFinesse? FinesseOnAxis(RingdownPreparation preparation, AxisPolynomial axis, double fsrHz)
    {
        ArgumentNullException.ThrowIfNull(preparation);
        ArgumentNullException.ThrowIfNull(axis);
        var x = preparation.Sweep.X;
        var stated = preparation.Evidence.SampleIntervalS;
        var items = new List<(double F, double FSigma, double Tau, double TauSigma, double Static, double Dt, double Rate, double ChirpDt)>();
        foreach (var p in preparation.Peaks.Where(p => !p.TauFixed && double.IsFinite(p.TauSigma) && p.TauSigma < 0.3 * p.Tau))
        {
            var i = (int)Math.Clamp(Math.Round(p.Crossing), 1, x.Length - 2);
            var hzPerSample = Math.Abs(axis.Derivative(x[i]) * (x[i + 1] - x[i - 1]) / 2);
            if (!(hzPerSample > 0)) continue;
            var dt = stated ?? p.Rate / hzPerSample;
            var tauS = p.Tau * dt;
            // relative error: τ, plus the rate when the interval comes from it
            var rel = Math.Sqrt(Sq(p.TauSigma / p.Tau) + (stated is null ? Sq(p.RateSigma / p.Rate) : 0));
            var f = Math.PI * fsrHz * tauS;
            items.Add((f, f * rel, tauS, tauS * rel, fsrHz / (p.MeasuredFwhm * hzPerSample), dt, p.Rate / (dt * dt), p.Rate / hzPerSample));
        }

        if (items.Count == 0) return null;
        var (fMean, fSigma) = WeightedMean(items.Select(v => (v.F, v.FSigma)).ToList());
        var (tMean, tSigma) = WeightedMean(items.Select(v => (v.Tau, v.TauSigma)).ToList());
        return new RingdownFinesse(fMean, fSigma, tMean, tSigma, 1 / (Math.PI * tMean), Medians.OfFinite(items.Select(v => v.Static)), Medians.OfFinite(items.Select(v => v.Dt)),
            Medians.OfFinite(items.Select(v => v.Rate)), items.Count, Medians.OfFinite(items.Select(v => v.ChirpDt)));
    }

    /// <summary>
    /// Puts the ring-down finesse into a calibration made from a prepared sweep, with a warning that says where it came
    /// from and what the static width would have given. Returns the calibration unchanged when there was no ring-down.
    /// </summary>
    public static AxisCalibration Annotate(AxisCalibration calibration, RingdownPreparation preparation, double fsrHz)
    {
        ArgumentNullException.ThrowIfNull(calibration);
        ArgumentNullException.ThrowIfNull(preparation);
        if (!preparation.Corrected) return calibration;
        var name = preparation.Sweep.Name;
        var warnings = calibration.Warnings.ToList();
        warnings.AddRange(preparation.Warnings);
        // the decay time gives F = π·FSR·τ with the FSR the period decision settled on, and the chirp check needs the axis in Hz
        // at that FSR: the axis is read at it (the calibration itself stays as built; the settlement converts it)
        var f = FinesseOnAxis(preparation, calibration.AtFsr(fsrHz, fsrHz).Axis, fsrHz);
        if (f is null)
        {
            warnings.Add($"{name}: the peaks ring down ({preparation.Evidence.Summary}) but no decay time could be measured well enough for a finesse; the finesse below is from the corrected peak widths");
            return calibration with { Warnings = warnings.Distinct().ToList() };
        }

        warnings.Add($"{name}: the sweep is fast enough to ring down (sweep rate / linewidth² = {preparation.Evidence.Dynamics:G3}); the peaks were fitted with the swept-cavity model " +
                     $"and the finesse {f.Finesse:F0} ± {f.Sigma:F0} comes from the decay time τ_field = {f.TauFieldS * 1e9:G4} ns (linewidth {f.LinewidthHz / 1e6:G4} MHz, {f.PeaksUsed} peaks), " +
                     $"not from the peak width: read statically, the ring-down broadened peaks would give only about {f.StaticWidthFinesse:F0}");
        if (preparation.Evidence.SampleIntervalS is double stated && Math.Abs(f.ChirpIntervalS / stated - 1) > 0.1)
            warnings.Add($"{name}: the axis scale disagrees with the sweep rate the ring-down measures: the chirp over the axis slope implies a sample interval of " +
                         $"{f.ChirpIntervalS * 1e9:G3} ns against the recorded {stated * 1e9:G3} ns (×{f.ChirpIntervalS / stated:F2}); the axis may be fitted with a wrong period (half or double the FSR)");
        return calibration with
        {
            Finesse = f.Finesse,
            FinesseSigma = f.Sigma,
            Method = calibration.Method + "; peaks at the fitted resonance crossings (ring-down corrected)",
            Warnings = warnings.Distinct().ToList(),
        };
    }

    // ------------------------------------------------------------------ fitting every peak

    private static List<RingdownPeakFit> FitAll(double[] y, double noise, double tau, RingdownOptions options, List<string> warnings, string name)
    {
        var n = y.Length;
        var baseline = PeakFinder.Percentile(y, 0.05);
        var residual = (double[])y.Clone();
        var fits = new List<RingdownPeakFit>();
        var blocked = new bool[n];
        var model = new double[RingdownFit.MaxWindow];
        var failed = 0;
        for (var round = 0; round < options.MaxPeaks + 20 && fits.Count < options.MaxPeaks; round++)
        {
            var top = -1;
            for (var i = 1; i < n - 1; i++)
                if (!blocked[i] && (top < 0 || residual[i] > residual[top])) top = i;
            if (top < 0 || residual[top] - baseline < options.MinSnr * noise) break;
            var (_, height, fwhm) = RingdownFit.Measure(residual, top, baseline);
            var (start, end) = RingdownFit.Window(n, top, fwhm);
            var fixedTau = height < options.FreeTauSnr * noise ? tau : (double?)null;
            // a top inside the core of a fitted peak that is small against it is that peak's misfit, not a new peak
            var misfit = fits.Any(f => Math.Abs(top - f.Crossing) < 2 * f.MeasuredFwhm + f.Delay && height < 0.15 * f.Amplitude);
            var fit = misfit ? null : RingdownFit.Fit(residual, start, end, top, fwhm, noise, fixedTau);
            var core = (int)Math.Ceiling(Math.Max(1.5 * fwhm, 3));
            // a peak that cannot be fitted keeps its ringing: block its ringing side too, so its lobes are not taken for peaks
            var blockEnd = misfit || (fit is not null && Acceptable(fit, top)) ? top + core : Math.Max(top + core, end - 1);
            for (var i = Math.Max(0, top - core); i <= Math.Min(n - 1, blockEnd); i++) blocked[i] = true;
            if (misfit || fit is null || !Acceptable(fit, top))
            {
                if (!misfit) failed++;
                continue;
            }

            fits.Add(fit);
            Subtract(residual, fit, model, -1);
        }

        // second round: each peak refitted with all the others subtracted
        for (var k = 0; k < fits.Count; k++)
        {
            var f = fits[k];
            Subtract(residual, f, model, +1); // residual now holds y minus the others
            var top = (int)Math.Round(f.Maximum);
            top = Math.Clamp(top, 1, n - 2);
            var (start, end) = RingdownFit.Window(n, top, f.MeasuredFwhm);
            var refit = RingdownFit.Fit(residual, start, end, top, f.MeasuredFwhm, noise, f.TauFixed ? tau : null);
            var use = refit is not null && Acceptable(refit, top) ? refit : f;
            fits[k] = use;
            Subtract(residual, use, model, -1);
        }

        if (fits.Count >= options.MaxPeaks)
            warnings.Add($"{name}: ring-down fitting stopped at {options.MaxPeaks} peaks; smaller peaks keep their ringing");
        if (failed > 0)
            warnings.Add($"{name}: {failed} peak(s) could not be fitted with the swept-cavity model and keep their ringing");
        var poor = fits.Count(f => f.ReducedChiSquare > 4);
        if (poor > 0)
            warnings.Add($"{name}: {poor} of {fits.Count} ring-down fits leave residuals above 2 noise σ RMS (reduced χ² > 4); the corrected signal may keep some ringing there");
        return fits.OrderBy(f => f.Crossing).ToList();
    }

    private static bool Acceptable(RingdownPeakFit f, int top) =>
        f.Amplitude > 0 && double.IsFinite(f.Crossing) && Math.Abs(f.Maximum - top) < Math.Max(3, f.MeasuredFwhm) && f.Tau < 0.5 * f.WindowCount;

    /// <summary>Adds (<paramref name="sign"/> = +1) or subtracts (−1) a fitted swept response to/from <paramref name="residual"/>.</summary>
    private static void Subtract(double[] residual, RingdownPeakFit f, double[] buffer, int sign)
    {
        var span = buffer.AsSpan(0, f.WindowCount);
        RingdownModel.Power(span, f.WindowStart, f.Crossing, f.Tau, f.Rate);
        for (var i = 0; i < f.WindowCount; i++) residual[f.WindowStart + i] += sign * f.Amplitude * span[i];
    }

    // ------------------------------------------------------------------ recognition helpers

    private sealed record Candidate(int Top, double Height, double Fwhm);

    /// <summary>The tallest separate maxima at least 20 σ and 30 % of the tallest above the baseline.</summary>
    private static List<Candidate> TallestTops(double[] y, double baseline, double noise, int count)
    {
        var n = y.Length;
        var blocked = new bool[n];
        var tops = new List<Candidate>();
        var tallest = double.NaN;
        while (tops.Count < count)
        {
            var top = -1;
            for (var i = 1; i < n - 1; i++)
                if (!blocked[i] && (top < 0 || y[i] > y[top])) top = i;
            if (top < 0) break;
            var (_, height, fwhm) = RingdownFit.Measure(y, top, baseline);
            if (double.IsNaN(tallest)) tallest = height;
            if (height < 20 * noise || height < 0.3 * tallest) break;
            var reach = (int)Math.Ceiling(12 * fwhm) + 10;
            for (var i = Math.Max(0, top - reach); i <= Math.Min(n - 1, top + reach); i++) blocked[i] = true;
            // a top near the record's ends cannot be judged
            if (top < 4 * fwhm + 6 || top > n - 1 - 8 * fwhm - 10) continue;
            tops.Add(new Candidate(top, height, fwhm));
        }

        return tops;
    }

    /// <summary>
    /// Ringing maxima on one side (<paramref name="direction"/> +1: after the top) of a peak: local maxima of the
    /// three-point mean within eight FWHM that rise at least 3 σ above the minimum before them and end 4 σ above the baseline,
    /// each lower than the one before (decaying); the count stops at the first that fails.
    /// </summary>
    private static List<int> Lobes(double[] y, int top, double fwhm, double baseline, double noise, int direction)
    {
        var n = y.Length;
        double S(int i) => (y[Math.Max(0, i - 1)] + y[i] + y[Math.Min(n - 1, i + 1)]) / 3;
        var reach = (int)Math.Ceiling(8 * fwhm) + 10;
        var lobes = new List<int>();
        var last = S(top);
        var low = last;
        var i0 = top + direction * Math.Max(1, (int)Math.Ceiling(0.5 * fwhm));
        for (var k = 0; k < reach; k++)
        {
            var i = i0 + direction * k;
            if (i <= 0 || i >= n - 1) break;
            var s = S(i);
            if (s < low) low = s;
            var prev = S(i - direction);
            var next = S(i + direction);
            if (s > prev && s >= next && s - low >= 3 * noise && s - baseline >= 4 * noise)
            {
                if (s >= last) break; // not decaying: another peak
                var spacing = Math.Abs(i - (lobes.Count > 0 ? lobes[^1] : top));
                if (lobes.Count > 0 && spacing > Math.Abs(lobes[^1] - (lobes.Count > 1 ? lobes[^2] : top))) break; // not chirped: another feature
                lobes.Add(i);
                last = s;
                low = s;
            }
        }

        return lobes;
    }

    private static List<int> Spacings(int top, List<int> lobes, bool reversed)
    {
        var list = new List<int>();
        var prev = top;
        foreach (var l in lobes)
        {
            list.Add(Math.Abs(l - prev));
            prev = l;
        }

        return list;
    }

    // ------------------------------------------------------------------ small helpers

    private static double[] Oriented(double[] y, bool reversed)
    {
        if (!reversed) return y;
        var r = (double[])y.Clone();
        Array.Reverse(r);
        return r;
    }

    private static RingdownPeakFit Mirror(RingdownPeakFit f, int n) => f with
    {
        Crossing = n - 1 - f.Crossing,
        Maximum = n - 1 - f.Maximum,
        WindowStart = n - f.WindowStart - f.WindowCount,
    };

    private static (double Mean, double Sigma) WeightedMean(List<(double Value, double Sigma)> items)
    {
        var good = items.Where(v => double.IsFinite(v.Value) && double.IsFinite(v.Sigma) && v.Sigma > 0).ToList();
        if (good.Count == 0) return (double.NaN, double.NaN);
        var sw = good.Sum(v => 1 / (v.Sigma * v.Sigma));
        var mean = good.Sum(v => v.Value / (v.Sigma * v.Sigma)) / sw;
        var internalSigma = Math.Sqrt(1 / sw);
        if (good.Count < 2) return (mean, internalSigma);
        var scatter = Math.Sqrt(good.Sum(v => Sq(v.Value - mean)) / (good.Count - 1) / good.Count);
        return (mean, Math.Max(internalSigma, scatter));
    }

    private static double Sq(double v) => v * v;
}

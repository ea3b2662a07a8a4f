using OrderUnfold.Calibration;
using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Simulation;

namespace OrderUnfold.Planning;

/// <summary>Options of <see cref="WhatIf.Run"/>.</summary>
public sealed record WhatIfOptions
{
    /// <summary>Gaussian noise σ as a fraction of the largest noiseless signal (as in <see cref="SimulationSpec.NoiseFraction"/>).</summary>
    public double NoiseFraction { get; init; } = 0.004;

    /// <summary>Samples per simulated record (a triangle ramp: half up, half down).</summary>
    public int Samples { get; init; } = 4000;

    /// <summary>Sweep span per ramp direction, in FSRs of each cavity.</summary>
    public double SpanFsr { get; init; } = 3.2;

    /// <summary>Digitiser resolution in bits (0: none).</summary>
    public int Bits { get; init; } = 8;

    /// <summary>Seed of the simulated noise and offsets.</summary>
    public int Seed { get; init; } = 1;

    /// <summary>Unfold window relative to the strongest line, Hz; null: the described lines' extent widened by
    /// <see cref="WindowPaddingHz"/> on each side.</summary>
    public double? WindowStartHz { get; init; }

    /// <summary>See <see cref="WindowStartHz"/>.</summary>
    public double? WindowEndHz { get; init; }

    /// <summary>Padding of the default window, Hz; null: the larger of 5 widest linewidths and 2 % of the lines' extent.</summary>
    public double? WindowPaddingHz { get; init; }

    /// <summary>A recovered line counts as a described one when it lies this close, Hz; null: one narrowest linewidth.</summary>
    public double? MatchToleranceHz { get; init; }

    /// <summary>An unmatched recovered line is a ghost (an alias) when its intensity is at least this fraction of
    /// the weakest described line's.</summary>
    public double GhostFraction { get; init; } = 0.25;

    /// <summary>Further unfold options (the window fields are overwritten).</summary>
    public UnfoldOptions? Unfold { get; init; }
}

/// <summary>One described line and what became of it.</summary>
/// <param name="RelativeHz">Its frequency relative to the strongest described line.</param>
/// <param name="RelativeIntensity">Its intensity relative to the strongest described line.</param>
/// <param name="Found">The recovered line matched to it, or null when none was close enough.</param>
/// <param name="ErrorHz">Recovered minus described position (after the common alignment), or null.</param>
public sealed record LineOutcome(double RelativeHz, double RelativeIntensity, UnfoldedLine? Found, double? ErrorHz);

/// <summary>The outcome of a simulated measurement with a planned design.</summary>
public sealed record WhatIfResult
{
    /// <summary>Each described line, strongest-relative, with its match.</summary>
    public required IReadOnlyList<LineOutcome> Lines { get; init; }

    /// <summary>Recovered lines matching no described line and at least <see cref="WhatIfOptions.GhostFraction"/>
    /// of the weakest described intensity: aliases or artefacts.</summary>
    public required IReadOnlyList<UnfoldedLine> Ghosts { get; init; }

    /// <summary>Recovered lines matching nothing but too weak to count as ghosts.</summary>
    public required int WeakExtras { get; init; }

    /// <summary>Shift added to the described positions to line them up with the recovered ones (the two lists
    /// are relative to different anchors when the strongest line is not recovered as the strongest), Hz.</summary>
    public required double AlignmentHz { get; init; }

    /// <summary>Matching tolerance used, Hz.</summary>
    public required double MatchToleranceHz { get; init; }

    /// <summary>Window given to the unfold, relative to the strongest line, Hz.</summary>
    public required double WindowStartHz { get; init; }

    /// <summary>See <see cref="WindowStartHz"/>.</summary>
    public required double WindowEndHz { get; init; }

    /// <summary>The unfold itself.</summary>
    public required UnfoldResult Unfold { get; init; }

    /// <summary>Every described line came back.</summary>
    public bool AllRecovered => Lines.All(l => l.Found is not null);

    /// <summary>Every described line came back and no ghost appeared.</summary>
    public bool Passes => AllRecovered && Ghosts.Count == 0;
}

/// <summary>
/// Tests a design before it is built: simulates sweeps of a described source through the planned cavities
/// (<see cref="Simulator"/>), unfolds them on the true scan axis (so only the design and the noise are tested,
/// not the axis calibration) and checks that every line came back and no alias appeared.
/// </summary>
public static class WhatIf
{
    /// <summary>Runs the simulation and the unfold. Lines are given on any origin; intensities must be positive. A cancelled
    /// <paramref name="cancellationToken"/> stops the unfold (<see cref="OperationCanceledException"/>).</summary>
    public static WhatIfResult Run(IReadOnlyList<Instrument> instruments, IReadOnlyList<SimulatedLine> lines, WhatIfOptions? options = null,
        IProgress<string>? progress = null, CancellationToken cancellationToken = default)
    {
        options ??= new WhatIfOptions();
        Validate(instruments, lines, options);

        var strongest = lines.MaxBy(l => l.Intensity)!;
        var rel = lines.Select(l => (Hz: l.FrequencyHz - strongest.FrequencyHz, I: l.Intensity / strongest.Intensity)).ToList();
        var lo = rel.Min(r => r.Hz);
        var hi = rel.Max(r => r.Hz);
        var pad = options.WindowPaddingHz ?? Math.Max(5 * instruments.Max(i => i.LinewidthHz), 0.02 * (hi - lo));
        var start = options.WindowStartHz ?? lo - pad;
        var end = options.WindowEndHz ?? hi + pad;
        if (!(end > start)) throw new InputException($"the what-if window is empty ({start} Hz to {end} Hz)");

        progress?.Report("simulating sweeps");
        var sweeps = SimulateSweeps(instruments, lines, options);

        var unfoldOptions = (options.Unfold ?? new UnfoldOptions()) with { WindowStartHz = start, WindowEndHz = end };
        progress?.Report("unfolding");
        var result = Unfolder.Run(sweeps, unfoldOptions, progress, cancellationToken);

        var tol = options.MatchToleranceHz ?? instruments.Min(i => i.LinewidthHz);
        var found = result.Lines;
        var best = BestShift(rel, found, tol);

        var (_, _, assignment) = Match(rel.Select(r => r.Hz + best.Shift).ToList(), found, tol);
        var outcomes = new List<LineOutcome>();
        for (var i = 0; i < rel.Count; i++)
        {
            var j = assignment[i];
            outcomes.Add(new LineOutcome(rel[i].Hz, rel[i].I, j >= 0 ? found[j] : null, j >= 0 ? found[j].FrequencyHz - (rel[i].Hz + best.Shift) : null));
        }

        var used = assignment.Where(j => j >= 0).ToHashSet();
        var weakest = rel.Min(r => r.I);
        var extras = found.Where((_, j) => !used.Contains(j)).ToList();
        var ghosts = extras.Where(f => f.Intensity >= options.GhostFraction * weakest).ToList();
        return new WhatIfResult
        {
            Lines = outcomes,
            Ghosts = ghosts,
            WeakExtras = extras.Count - ghosts.Count,
            AlignmentHz = best.Shift,
            MatchToleranceHz = tol,
            WindowStartHz = start,
            WindowEndHz = end,
            Unfold = result,
        };
    }

    private static void Validate(IReadOnlyList<Instrument> instruments, IReadOnlyList<SimulatedLine> lines, WhatIfOptions options)
    {
        if (instruments.Count == 0) throw new InputException("the what-if needs at least one cavity");
        if (lines.Count == 0) throw new InputException("the what-if needs at least one line in the source");
        foreach (var l in lines)
        {
            if (!double.IsFinite(l.FrequencyHz)) throw new InputException($"a source line has no finite frequency ({l.FrequencyHz} Hz)");
            if (!(l.Intensity > 0) || !double.IsFinite(l.Intensity)) throw new InputException($"a source line needs a positive intensity but got {l.Intensity}");
        }

        if (!(options.NoiseFraction >= 0) || !double.IsFinite(options.NoiseFraction))
            throw new InputException($"the noise level must be zero or a positive fraction of the peak signal but got {options.NoiseFraction}");
        if (options.Samples < 100) throw new InputException($"the simulated records need at least 100 samples but got {options.Samples}");
        if (!(options.SpanFsr >= 1.1)) throw new InputException($"each sweep must cover more than one FSR but got {options.SpanFsr} FSR");
    }

    /// <summary>One triangle-ramp record per cavity, split into its up and down halves, on the true scan axis.</summary>
    private static List<CalibratedSweep> SimulateSweeps(IReadOnlyList<Instrument> instruments, IReadOnlyList<SimulatedLine> lines, WhatIfOptions options)
    {
        var spec = new SimulationSpec
        {
            Lines = lines,
            Cavities = instruments.Select(i => new SimulatedCavity { Instrument = i, Samples = options.Samples, SpanFsr = options.SpanFsr }).ToList(),
            NoiseFraction = options.NoiseFraction,
            Bits = options.Bits,
            Seed = options.Seed,
            CalibrationSweeps = false,
        };
        var sweeps = new List<CalibratedSweep>();
        var rng = new Random(spec.Seed);
        foreach (var cav in spec.Cavities)
        {
            var trace = Simulator.Trace(spec, cav, false, rng);
            var half = trace.Signal.Length / 2;
            foreach (var (a, b, dir) in new[] { (0, half, "up"), (half, trace.Signal.Length, "down") })
            {
                var y = trace.Signal[a..b];
                sweeps.Add(new CalibratedSweep($"{cav.Instrument.Name} ({dir})", cav.Instrument, trace.TrueScanHz[a..b], y, NoiseEstimator.FirstDifferenceSigma(y)));
            }
        }

        return sweeps;
    }

    /// <summary>The common shift that matches the most lines (the two lists may be relative to different anchors); ties go
    /// to the smaller summed error, then to the smaller shift.</summary>
    private static (int Count, double Shift, double Error) BestShift(List<(double Hz, double I)> rel, IReadOnlyList<UnfoldedLine> found, double tol)
    {
        var shifts = new List<double> { 0 };
        foreach (var f in found)
        foreach (var r in rel)
            shifts.Add(f.FrequencyHz - r.Hz);
        var best = (Count: -1, Shift: 0.0, Error: double.PositiveInfinity);
        foreach (var s in shifts)
        {
            var (count, err, _) = Match(rel.Select(r => r.Hz + s).ToList(), found, tol);
            if (count > best.Count || (count == best.Count && (err < best.Error - 1e-9 || (Math.Abs(err - best.Error) <= 1e-9 && Math.Abs(s) < Math.Abs(best.Shift)))))
                best = (count, s, err);
        }

        return best;
    }

    /// <summary>Greedy one-to-one matching, closest pairs first: (matched count, summed |error|, recovered index per target or −1).</summary>
    private static (int Count, double Error, int[] Assignment) Match(IReadOnlyList<double> targets, IReadOnlyList<UnfoldedLine> found, double tol)
    {
        var pairs = new List<(double D, int T, int F)>();
        for (var t = 0; t < targets.Count; t++)
        for (var f = 0; f < found.Count; f++)
        {
            var d = Math.Abs(found[f].FrequencyHz - targets[t]);
            if (d <= tol) pairs.Add((d, t, f));
        }

        var assignment = Enumerable.Repeat(-1, targets.Count).ToArray();
        var taken = new bool[found.Count];
        var count = 0;
        var error = 0.0;
        foreach (var (d, t, f) in pairs.OrderBy(p => p.D))
        {
            if (assignment[t] >= 0 || taken[f]) continue;
            assignment[t] = f;
            taken[f] = true;
            count++;
            error += d;
        }

        return (count, error, assignment);
    }
}

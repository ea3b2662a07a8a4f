using OrderUnfold.Inversion;
using OrderUnfold.Units;

namespace OrderUnfold.Calibration;

/// <summary>
/// Decides the FSRs of the instruments from the lines, before the unfold whose results are reported. Each instrument's
/// sweeps are fitted on their own with the lines of a trial unfold as the starting point (positions, intensities, one
/// offset, gain and background per sweep), so every instrument gives the line positions in its own frequency scale. A
/// wrong FSR stretches that scale: the slope of one instrument's positions against the reference's is the FSR ratio
/// correction (the Vernier pattern). A known interval (RF sidebands at a stated frequency, a known splitting) between
/// matched lines fixes the absolute scale. The trial sweeps are then put at the corrected trial scale (axis and FSR
/// together) and unfolded again; rounds repeat until the correction no longer moves the farthest line by a fifth of a
/// linewidth. Only the decided FSRs leave the search (<see cref="FsrRefinement"/>): the pipeline builds its axes and
/// sweeps at them once (Pipeline/FsrDecisionStage.cs).
/// The stages: <see cref="FsrPrescan"/> (folded peaks, before any unfold), <see cref="FsrScaleEstimator"/> (one round's
/// estimate, with <see cref="InstrumentLineFitter"/>), and the rounds here.
/// </summary>
public static class FsrRefiner
{
    /// <summary>
    /// Decides the FSRs from the lines: a scan of the folded peak positions first corrects FSR errors of up to
    /// <see cref="FsrRefineOptions.MaxScaleError"/> (with a known interval, each instrument on its own; without one, the
    /// ratio to the reference), so that the first trial unfold already sees consistent instruments; then rounds of
    /// per-instrument line fits polish the ratios and the absolute scale, each followed by a trial unfold. The trial
    /// sweeps at trial scales are the search's own; what it hands on is the decision (FSR, basis and uncertainty per
    /// instrument), from which the caller builds its axes and sweeps once.
    /// </summary>
    /// <param name="sweeps">Calibrated sweeps at the FSRs settled before the search (their axes are in units of those FSRs).</param>
    /// <param name="unfoldOptions">Options of the trial unfolds.</param>
    /// <param name="options">What to refine.</param>
    /// <param name="progress">Progress messages.</param>
    /// <param name="cancellationToken">Stops the trial unfolds and the rounds (<see cref="OperationCanceledException"/>).</param>
    public static FsrRefinement Decide(IReadOnlyList<CalibratedSweep> sweeps, UnfoldOptions? unfoldOptions, FsrRefineOptions options, IProgress<string>? progress = null,
        CancellationToken cancellationToken = default)
    {
        unfoldOptions ??= new UnfoldOptions();
        var names = sweeps.Select(s => s.Instrument.Name).Distinct().ToList();
        var reference = options.ReferenceInstrument ?? names[0];
        var scan = FsrPrescan.Run(sweeps, unfoldOptions, options with { ReferenceInstrument = reference }, names.Count > 1 && options.RefineRatio);
        var current = sweeps.Select(s => AtTrialScale(s, scan.Scales.GetValueOrDefault(s.Instrument.Name, 1.0))).ToList();
        progress?.Report("unfolding with the pre-scanned FSRs");
        var first = Unfolder.Run(current, unfoldOptions, progress, cancellationToken);
        var rounds = new RefinementRounds(sweeps, scan.Scales, scan.Basis, current, first, unfoldOptions, options, progress, scan.Notes, scan.Warnings, cancellationToken);
        return rounds.Run();
    }

    /// <summary>A trial sweep of the search: the sweep with its FSR and axis scaled by the same trial factor.</summary>
    public static CalibratedSweep AtTrialScale(CalibratedSweep s, double factor) =>
        factor == 1 ? s : s with
        {
            Instrument = s.Instrument with { FsrHz = s.Instrument.FsrHz * factor },
            ScanHz = s.ScanHz.Select(v => v * factor).ToArray(),
            AxisUncertainty = s.AxisUncertainty?.Scaled(factor),
        };

    /// <summary>The refine-and-unfold rounds from a first unfold: estimate, rescale, unfold, keep while χ² falls.</summary>
    private sealed class RefinementRounds
    {
        private readonly IReadOnlyList<CalibratedSweep> _sweeps;
        private readonly UnfoldOptions _unfoldOptions;
        private readonly FsrRefineOptions _options;
        private readonly IProgress<string>? _progress;
        private readonly CancellationToken _cancellationToken;
        private readonly List<string> _names;
        private readonly Dictionary<string, double> _nominal;
        private readonly string _reference;
        private readonly List<string> _warnings;
        private readonly List<string> _notes;
        private readonly Dictionary<string, double> _scale;
        private readonly Dictionary<string, double> _relSigma;
        private readonly Dictionary<string, string> _basis;
        private readonly UnfoldResult _first;
        private IReadOnlyList<CalibratedSweep> _current;
        private UnfoldResult _currentResult;
        private List<IntervalMatch> _intervals = [];
        private int _rounds;

        public RefinementRounds(IReadOnlyList<CalibratedSweep> sweeps, IReadOnlyDictionary<string, double> startScale, IReadOnlyDictionary<string, string> startBasis,
            IReadOnlyList<CalibratedSweep> current, UnfoldResult result, UnfoldOptions unfoldOptions, FsrRefineOptions options, IProgress<string>? progress,
            IEnumerable<string> startNotes, IEnumerable<string> startWarnings, CancellationToken cancellationToken)
        {
            _cancellationToken = cancellationToken;
            (_sweeps, _current, _currentResult, _first, _unfoldOptions, _options, _progress) = (sweeps, current, result, result, unfoldOptions, options, progress);
            _names = sweeps.Select(s => s.Instrument.Name).Distinct().ToList();
            _nominal = _names.ToDictionary(n => n, n => sweeps.First(s => s.Instrument.Name == n).Instrument.FsrHz);
            _reference = options.ReferenceInstrument ?? _names[0];
            if (!_names.Contains(_reference)) throw new InputException($"reference instrument '{_reference}' has no sweeps (instruments: {string.Join(", ", _names)})");
            _warnings = startWarnings.ToList();
            _notes = startNotes.ToList();
            _scale = _names.ToDictionary(n => n, n => startScale.GetValueOrDefault(n, 1.0));
            _relSigma = _names.ToDictionary(n => n, _ => double.NaN);
            _basis = _names.ToDictionary(n => n, n => startBasis.GetValueOrDefault(n, n == _reference ? "reference (stated FSR)" : "stated FSR"));
        }

        public FsrRefinement Run()
        {
            if (_names.Count < 2 && _options.KnownIntervalHz is null)
            {
                _notes.Add("one instrument and no known interval: nothing to refine the FSR against");
                return Finish();
            }

            var budget = new WorkBudget(int.MaxValue, _options.CpuBudgetSeconds, _progress, _cancellationToken);
            for (var round = 0; round < _options.MaxRounds; round++)
                if (!Round(round, budget)) break;
            return Finish();
        }

        /// <summary>One round; false when the rounds end.</summary>
        private bool Round(int round, WorkBudget budget)
        {
            var est = FsrScaleEstimator.Estimate(_current, _currentResult, _options with { ReferenceInstrument = _reference }, _names.Count > 1 && _options.RefineRatio, budget);
            _rounds = round + 1;
            if (budget.Exhausted is not null)
            {
                // a line fit cut short measures nothing reliable: this round's scales are not applied
                _warnings.Add($"the FSR refinement stopped in round {round + 1} because {budget.Exhausted} (after {budget.CpuSeconds:F1} s); " +
                              (round == 0 ? "the FSRs were not refined beyond the pre-scan" : "the FSRs are those of the rounds before"));
                return false;
            }

            if (round == 0)
            {
                _warnings.AddRange(est.Warnings);
                _notes.AddRange(est.Notes);
            }

            if (est.Scales.Count == 0) return false;
            var farthest = _currentResult.Lines.Count == 0 ? 0 : _currentResult.Lines.Max(l => Math.Abs(l.FrequencyHz));
            var narrow = _current.Min(s => s.Instrument.LinewidthHz);
            var biggest = est.Scales.Values.Max(v => Math.Abs(v.Scale - 1));
            foreach (var (n, v) in est.Scales)
            {
                _scale[n] *= v.Scale;
                _relSigma[n] = v.RelativeSigma;
                _basis[n] = v.Basis;
            }

            if (est.Intervals.Count > 0) _intervals = est.Intervals;
            // the correction moves no line by a fiftieth of a linewidth: no trial unfold, the scales as corrected are decided
            if (biggest * farthest < 0.02 * narrow) return false;

            return UnfoldAgain(round, est) && !(biggest * farthest < 0.2 * narrow);
        }

        /// <summary>Unfolds with the new scales. Each round costs an unfold: a round that does not lower χ² is undone and ends
        /// the rounds, one that lowers it by less than 2 % ends them (bounded cost; the next round would move the lines by
        /// less still). False when the rounds end.</summary>
        private bool UnfoldAgain(int round, FsrScaleEstimator.Estimation est)
        {
            _progress?.Report($"unfolding with refined FSRs (round {round + 1})");
            var previous = (Current: _current, Result: _currentResult, Scale: new Dictionary<string, double>(_scale));
            foreach (var (n, v) in est.Scales) previous.Scale[n] /= v.Scale;
            _current = _sweeps.Select(s => AtTrialScale(s, _scale[s.Instrument.Name])).ToList();
            _currentResult = Unfolder.Run(_current, _unfoldOptions, _progress, _cancellationToken);
            var before = previous.Result.Sweeps.Sum(f => f.ChiSquare);
            var after = _currentResult.Sweeps.Sum(f => f.ChiSquare);
            if (after > before)
            {
                (_current, _currentResult) = (previous.Current, previous.Result);
                foreach (var n in _names) _scale[n] = previous.Scale[n];
                _notes.Add($"round {round + 1} of the FSR refinement raised χ² ({after:G6} > {before:G6}); it was undone and the rounds stopped");
                return false;
            }

            return !(after > 0.98 * before);
        }

        private FsrRefinement Finish()
        {
            var scales = _names.Select(n => new InstrumentScale(n, _nominal[n], _nominal[n] * _scale[n], _nominal[n] * _scale[n] * _relSigma[n], _scale[n] - 1, _basis[n])).ToList();
            // where each line would sit on the reference's stated FSR scale
            var refScale = _scale[_reference];
            var shifts = _currentResult.Lines.Select(l => new LineShift(l.FrequencyHz / refScale, l.FrequencyHz)).ToList();
            var matched = MeasuredIntervals(_intervals, _currentResult);
            foreach (var s in scales.Where(s => Math.Abs(s.RelativeChange) > 0.003))
                _warnings.Add($"instrument '{s.Instrument}': the FSR refined from the data ({s.Basis}) is {Quantity.FormatFrequency(s.RefinedFsrHz, 7)}, {100 * s.RelativeChange:+0.000;-0.000} % from the stated {Quantity.FormatFrequency(s.NominalFsrHz, 7)}; update the setup");
            return new FsrRefinement(scales, matched, _rounds, _first.ReducedChiSquare, _currentResult.ReducedChiSquare, shifts, _warnings, _notes);
        }
    }

    /// <summary>The matched pairs with their separation measured in the final result (nearest lines).</summary>
    private static List<IntervalMatch> MeasuredIntervals(List<IntervalMatch> matched, UnfoldResult result)
    {
        if (matched.Count == 0 || result.Lines.Count == 0) return matched;
        return matched.Select(m =>
        {
            var lo = result.Lines.MinBy(l => Math.Abs(l.FrequencyHz - m.LowerHz))!.FrequencyHz;
            var hi = result.Lines.MinBy(l => Math.Abs(l.FrequencyHz - m.UpperHz))!.FrequencyHz;
            return m with { LowerHz = lo, UpperHz = hi, MeasuredHz = hi - lo };
        }).ToList();
    }
}

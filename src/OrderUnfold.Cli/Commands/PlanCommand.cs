using System.Globalization;
using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using OrderUnfold.Io;
using OrderUnfold.Planning;
using OrderUnfold.Plotting;
using OrderUnfold.Simulation;
using OrderUnfold.Units;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold plan</c>: choose a second (or third) cavity length, or judge a given set of cavities.</summary>
public sealed class PlanCommand : ICommand
{
    /// <summary>How many of the best two-cavity designs a three-cavity search extends.</summary>
    private const int PairsExtended = 5;

    /// <inheritdoc/>
    public string Name => "plan";

    /// <inheritdoc/>
    public string Summary => "choose cavity lengths that keep aliases away over the source's span";

    /// <inheritdoc/>
    public string Usage => """
        orderunfold plan: choose the length of a second (or third) cavity so that no alias comes closer than the
        required margin over the span of the source, robust to the length tolerance; or judge a given set.

        Reference cavity (one of):
          --first-length LEN | --first-fsr FREQ   the cavity you have, e.g. "100 mm" or "1.5 GHz"
          --first-geometry planar|confocal        (default planar)
          --finesse N                             its finesse (required with --first-*)
          --setup FILE                            instead: the cavities of a setup file (the first is the reference)
        What to achieve:
          --span FREQ          largest shift that must be unambiguous, e.g. "20 GHz" (required)
          --margin N           required alias margin in linewidths (default 3)
          --min-shift FREQ     shifts below this are the line itself (default 2 × margin × narrowest linewidth)
        Candidates for a new cavity (a range or a catalogue):
          --second-min LEN --second-max LEN --step LEN   e.g. "80 mm", "120 mm", "0.1 mm"
          --catalogue FILE     one length per line ("93.7 mm" or "93.7 mm, part label"); # starts a comment
          --second-geometry planar|confocal   (default: that of the reference)
          --second-finesse N   (default: that of the reference)
          --tolerance LEN      length tolerance of the part to be made, e.g. "0.05 mm" (default 0)
          --third              also search three-cavity designs (done anyway when no two-cavity design passes)
        A given design to judge (instead of candidates):
          --second-length LEN | --second-fsr FREQ, optionally --third-length LEN | --third-fsr FREQ
        Output:
          --out DIR            where plan.csv, margin.png and candidates.png go (default ./plan-out)
          --top N              rows of the printed table (default 10)
          --samples-per-fsr N, --passes N   sweep sampling assumed by the SNR estimate (default 1250, 6)
        What-if (simulate the recommended design and unfold):
          --simulate --lines "0 GHz, 3.2 GHz@0.5, 7.9 GHz@0.3"   lines of the source (@ relative intensity, default 1)
          --noise F            noise σ as a fraction of the peak signal (default 0.004)
          --samples N          samples per simulated record (default 4000); --seed N (default 1)

        Exit code 0 when the recommended design meets the margin (and the what-if recovers every line),
        1 when it does not, 2 for bad input.
        """;

    /// <inheritdoc/>
    public int Run(string[] argv, TextWriter stdout, TextWriter stderr)
    {
        var args = new Args(Name, argv,
            [
                "first-length", "first-fsr", "first-geometry", "finesse", "setup", "span", "margin", "min-shift",
                "second-min", "second-max", "step", "catalogue", "second-geometry", "second-finesse", "tolerance",
                "second-length", "second-fsr", "third-length", "third-fsr", "out", "top", "samples-per-fsr", "passes",
                "lines", "noise", "samples", "seed",
            ],
            ["third", "simulate"]);
        args.NoMorePositionals(0);

        var span = args.Quantity("span", Dimension.Frequency) ?? throw new UsageException("plan: --span is required (the largest shift to keep unambiguous, e.g. \"20 GHz\")");
        var margin = args.Double("margin") ?? 3;
        if (!(margin > 0)) throw new UsageException($"plan: --margin expects a positive number of linewidths but got '{args.Value("margin")}'");
        var tolerance = args.Quantity("tolerance", Dimension.Length) ?? 0;
        if (tolerance < 0) throw new UsageException($"plan: --tolerance must not be negative but got '{args.Value("tolerance")}'");
        var top = args.Int("top", 1) ?? 10;
        var settings = new PlanSettings
        {
            SpanHz = span,
            ThresholdLinewidths = margin,
            MinimumShiftHz = args.Quantity("min-shift", Dimension.Frequency),
            Sampling = new SweepSampling(args.Double("samples-per-fsr") ?? 1250, args.Double("passes") ?? 6),
        };
        settings.Validate();

        // the fixed cavities: a setup file, or the reference (+ optional given second/third) from flags
        var fixedCavities = FixedCavities(args, tolerance);
        var reference = fixedCavities[0].Instrument;

        // candidates
        var candidates = Candidates(args);
        var geometry = Geometry(args, "second-geometry") ?? reference.Geometry;
        var family = new CavityFamily(geometry, PositiveFinesse(args, "second-finesse") ?? reference.Finesse, tolerance);
        if (args.Flag("third") && candidates is null) throw new UsageException("plan: --third searches candidate lengths; give --second-min/--second-max/--step or --catalogue");
        if (args.Flag("third") && fixedCavities.Count > 1)
            throw new UsageException($"plan: --third extends two-cavity designs, but {fixedCavities.Count} cavities are given already; the search adds one more to them");
        if (candidates is null && fixedCavities.Count < 2)
            throw new UsageException("plan: nothing to plan: give candidate lengths (--second-min/--second-max/--step or --catalogue), a second cavity (--second-length or --second-fsr), or a setup file with two or more cavities");

        var (simLines, whatIfOptions) = WhatIfSettings(args);
        var outDir = args.Value("out") ?? "plan-out";

        stdout.WriteLine("orderunfold plan");
        stdout.WriteLine($"Reference: {reference.Name}, {fixedCavities[0].Describe()}, finesse {reference.Finesse.ToString("0.#", CultureInfo.InvariantCulture)}, linewidth {Quantity.FormatFrequency(reference.LinewidthHz)}");
        foreach (var c in fixedCavities.Skip(1)) stdout.WriteLine($"Given:     {c.Instrument.Name}, {c.Describe()}, finesse {c.Instrument.Finesse.ToString("0.#", CultureInfo.InvariantCulture)}");
        if (tolerance > 0 && fixedCavities.Skip(1).Any(c => c.Instrument.LengthM is null))
            stdout.WriteLine("Note: --tolerance applies only to cavities given by a length; cavities given by their FSR are taken as exact.");
        stdout.WriteLine($"Span {Quantity.FormatFrequency(span)}; required margin {margin.ToString("G3", CultureInfo.InvariantCulture)} linewidths" +
                         (settings.MinimumShiftHz is double ms ? $"; shifts below {Quantity.FormatFrequency(ms)} count as the line itself" : "; shifts below 2 × margin × the narrowest linewidth count as the line itself"));

        IReadOnlyList<DesignEvaluation> ranked;
        IReadOnlyList<DesignEvaluation>? triples = null;
        DesignEvaluation chosen;
        if (candidates is not null)
        {
            stdout.WriteLine($"Candidates: {candidates.Description}; {geometry.ToString().ToLowerInvariant()}, finesse {family.Finesse.ToString("0.#", CultureInfo.InvariantCulture)}" +
                             (tolerance > 0 ? $", tolerance ±{Quantity.FormatLength(tolerance)}" : ", no length tolerance"));
            ranked = Planner.RankAddedCavity(fixedCavities, candidates.Lengths, family, settings, fixedCavities.Count == 1 ? "second" : "added");
            stdout.WriteLine();
            stdout.WriteLine($"{(fixedCavities.Count == 1 ? "Two" : (fixedCavities.Count + 1).ToString(CultureInfo.InvariantCulture))}-cavity designs, best {Math.Min(top, ranked.Count)} of {ranked.Count}:");
            stdout.Write(PlanReport.Table(ranked, top));
            chosen = ranked[0];
            if (fixedCavities.Count == 1 && (args.Flag("third") || !ranked[0].Passes))
            {
                if (!ranked[0].Passes) stdout.WriteLine($"No two-cavity design meets the margin; trying a third cavity on the best {PairsExtended}.");
                triples = Planner.RankThirdCavity(ranked.Take(PairsExtended).ToList(), candidates.Lengths, family, settings, top);
                stdout.WriteLine();
                stdout.WriteLine($"Three-cavity designs (third cavity added to the best {PairsExtended} pairs), best {triples.Count}:");
                stdout.Write(PlanReport.Table(triples, top));
                if (!chosen.Passes && triples.Count > 0 && (triples[0].Passes || triples[0].Robust.MarginLinewidths > chosen.Robust.MarginLinewidths))
                    chosen = triples[0];
            }
        }
        else
        {
            chosen = Planner.Evaluate(fixedCavities, settings);
            ranked = [chosen];
            stdout.WriteLine();
            stdout.WriteLine("The given design:");
            stdout.Write(PlanReport.Table(ranked, 1));
        }

        var instruments = chosen.Instruments;
        var limit = Math.Min(chosen.Repeat?.RepeatHz ?? chosen.RepeatSearchLimitHz, chosen.RepeatSearchLimitHz);
        limit = Math.Max(limit, span);
        var unambiguous = AliasMargin.FirstBelow(instruments, margin, chosen.MinimumShiftHz, limit);

        // the what-if runs before the verdict is printed: a design whose own simulation shows ghost or missing lines
        // is not reported as ok
        WhatIfResult? whatIf = null;
        if (simLines is not null) whatIf = WhatIf.Run(instruments, simLines, whatIfOptions, new Progress(stderr));
        var confirmed = whatIf is null || whatIf.Passes;
        stdout.WriteLine();
        stdout.WriteLine(chosen.Passes && confirmed ? (candidates is null ? "Design:" : "Recommended:") :
            chosen.Passes ? (candidates is null ? "Design (meets the margin, but its what-if simulation fails):" : "Best found (meets the margin, but its what-if simulation fails):") :
            candidates is null ? "Design (does not meet the required margin):" : "Best found (does not meet the required margin):");
        var description = PlanReport.Describe(chosen, unambiguous, limit, settings.Sampling, settings.RequiredDeltaChiSquare);
        if (chosen.Passes && !confirmed)
            description = description.Replace("  verdict: ok", "  verdict: not confirmed: the alias margin is met, but the what-if simulation below " +
                (whatIf!.AllRecovered ? $"shows {whatIf.Ghosts.Count} ghost line(s)" : "misses line(s)"));
        stdout.Write(description);

        // files: complete or absent (Io/StagedFolder.cs)
        using var staged = StagedFolder.Create(outDir);
        var csvPath = Path.Combine(staged.Path, "plan.csv");
        var all = triples is null ? ranked : ranked.Concat(triples).ToList();
        AtomicFile.WriteAllText(csvPath, PlanReport.Csv(all));
        var marginPath = Path.Combine(staged.Path, "margin.png");
        var curve = AliasMargin.Vertices(instruments, 0, span);
        var names = string.Join(" + ", chosen.Cavities.Select(c => c.Instrument.LengthM is double l ? Quantity.FormatLength(l) : Quantity.FormatFrequency(c.Instrument.FsrHz) + " FSR"));
        PlanPlots.SaveMarginCurve(marginPath, new MarginCurveInput(
            $"Alias margin of {names} ({chosen.Cavities[0].Instrument.Geometry.ToString().ToLowerInvariant()} reference)",
            $"worst within tolerance {chosen.Robust.MarginLinewidths:0.##} linewidths at {Quantity.FormatFrequency(chosen.Robust.DeltaHz)} · verdict: {(chosen.Passes && !confirmed ? "not confirmed by the what-if" : chosen.VerdictText)} · curve at nominal lengths",
            curve, margin, chosen.MinimumShiftHz, AliasMargin.Aliases(instruments, margin, chosen.MinimumShiftHz, span), chosen.Nominal, chosen.Repeat?.RepeatHz,
            "worst alias at nominal lengths"));
        var written = new List<string> { csvPath, marginPath };
        if (candidates is not null)
        {
            var candPath = Path.Combine(staged.Path, "candidates.png");
            var lengths = ranked.Select(d => d.Added[^1].Instrument.LengthM!.Value).ToArray();
            var chosenLength = chosen.Cavities.Count == fixedCavities.Count + 1 ? chosen.Added[^1].Instrument.LengthM : ranked[0].Added[^1].Instrument.LengthM;
            PlanPlots.SaveCandidateMap(candPath, new CandidateMapInput(
                $"Worst alias margin over {Quantity.FormatFrequency(span)} against the length of the added cavity",
                $"with {string.Join(" + ", fixedCavities.Select(c => c.Describe()))}" + (tolerance > 0 ? $" · tolerance ±{Quantity.FormatLength(tolerance)}" : "") +
                (chosen.Cavities.Count > fixedCavities.Count + 1 ? " · the chosen design has a third cavity (see plan.csv)" : ""),
                lengths, ranked.Select(d => d.Nominal.MarginLinewidths).ToArray(),
                tolerance > 0 ? ranked.Select(d => d.Robust.MarginLinewidths).ToArray() : null,
                margin, chosenLength, candidates.Stepped,
                chosen.Cavities.Count > fixedCavities.Count + 1 ? "best two-cavity design" : chosen.Passes ? "recommended" : "best found"));
            written.Add(candPath);
        }

        staged.Publish("plan.csv");
        stdout.WriteLine();
        stdout.WriteLine("Wrote " + string.Join(", ", written.Select(staged.Final)));

        var ok = chosen.Passes;
        if (simLines is not null && whatIf is not null)
        {
            stdout.WriteLine();
            stdout.WriteLine($"What-if: simulated {simLines.Count} line(s) through {instruments.Count} cavities (noise {whatIfOptions.NoiseFraction.ToString("G3", CultureInfo.InvariantCulture)} of the peak, {whatIfOptions.Samples} samples per record, seed {whatIfOptions.Seed}) and unfolded");
            stdout.Write(PlanReport.WhatIfSummary(whatIf));
            ok &= whatIf.Passes;
        }

        return ok ? ExitCodes.Ok : ExitCodes.SomeFailed;
    }

    private sealed class Progress(TextWriter stderr) : IProgress<string>
    {
        public void Report(string value) => stderr.WriteLine("  … " + value);
    }

    private sealed record CandidateSet(IReadOnlyList<CandidateLength> Lengths, string Description, bool Stepped);

    private static List<DesignCavity> FixedCavities(Args args, double tolerance)
    {
        var fromFlags = new[] { "first-length", "first-fsr", "first-geometry", "finesse" }.Where(n => args.Value(n) is not null).ToList();
        if (args.Value("setup") is string setupPath)
        {
            if (fromFlags.Count > 0) throw new UsageException($"plan: --setup gives the cavities; do not combine it with --{fromFlags[0]}");
            var given = new[] { "second-length", "second-fsr", "third-length", "third-fsr" }.FirstOrDefault(n => args.Value(n) is not null);
            if (given is not null) throw new UsageException($"plan: --setup gives the cavities; do not combine it with --{given}");
            var setup = SetupReader.Read(setupPath);
            if (setup.Instruments.Count == 0) throw new InputException("the setup lists no [[instrument]]", setupPath);
            var list = new List<DesignCavity>();
            for (var i = 0; i < setup.Instruments.Count; i++)
            {
                var inst = setup.Instruments[i].ToInstrument();
                // the reference exists; the others get the tolerance when they are given by a length
                list.Add(new DesignCavity(inst, i > 0 && inst.LengthM is not null ? tolerance : 0));
            }

            return list;
        }

        var length = args.Quantity("first-length", Dimension.Length);
        var fsr = args.Quantity("first-fsr", Dimension.Frequency);
        if (length is not null && fsr is not null) throw new UsageException("plan: give the reference cavity by --first-length or --first-fsr, not both");
        if (length is null && fsr is null) throw new UsageException("plan: the reference cavity is missing: give --first-length or --first-fsr (with --finesse), or --setup FILE");
        var finesse = PositiveFinesse(args, "finesse") ?? throw new UsageException("plan: --finesse is required with --first-length/--first-fsr (the reference cavity's finesse)");
        var geometry = Geometry(args, "first-geometry") ?? CavityGeometry.Planar;
        var first = length is double l ? Instrument.FromLength("first", l, geometry, finesse) : new Instrument("first", fsr!.Value, finesse, geometry);
        var cavities = new List<DesignCavity> { new(first) };
        var secondGeometry = Geometry(args, "second-geometry") ?? geometry;
        var secondFinesse = PositiveFinesse(args, "second-finesse") ?? finesse;
        foreach (var (name, lenOpt, fsrOpt) in new[] { ("second", "second-length", "second-fsr"), ("third", "third-length", "third-fsr") })
        {
            var len = args.Quantity(lenOpt, Dimension.Length);
            var f = args.Quantity(fsrOpt, Dimension.Frequency);
            if (len is not null && f is not null) throw new UsageException($"plan: give the {name} cavity by --{lenOpt} or --{fsrOpt}, not both");
            if (len is null && f is null) continue;
            if (name == "third" && cavities.Count < 2) throw new UsageException("plan: a third cavity needs a second one (--second-length or --second-fsr)");
            var inst = len is double ll ? Instrument.FromLength(name, ll, secondGeometry, secondFinesse) : new Instrument(name, f!.Value, secondFinesse, secondGeometry);
            cavities.Add(new DesignCavity(inst, len is not null ? tolerance : 0));
        }

        return cavities;
    }

    private static CandidateSet? Candidates(Args args)
    {
        var min = args.Quantity("second-min", Dimension.Length);
        var max = args.Quantity("second-max", Dimension.Length);
        var step = args.Quantity("step", Dimension.Length);
        var catalogue = args.Value("catalogue");
        var rangeGiven = min is not null || max is not null || step is not null;
        if (catalogue is not null && rangeGiven) throw new UsageException("plan: give candidates either as a range (--second-min/--second-max/--step) or as --catalogue, not both");
        if (catalogue is not null)
        {
            var list = CandidateCatalogue.ReadCatalogue(catalogue);
            return new CandidateSet(list, $"{list.Count} length(s) from {catalogue}", false);
        }

        if (!rangeGiven) return null;
        if (min is null || max is null || step is null)
        {
            var missing = new[] { ("second-min", min), ("second-max", max), ("step", step) }.Where(t => t.Item2 is null).Select(t => "--" + t.Item1);
            throw new UsageException($"plan: a candidate range needs --second-min, --second-max and --step; missing {string.Join(", ", missing)}");
        }

        var lengths = CandidateLengths.Range(min.Value, max.Value, step.Value);
        return new CandidateSet(lengths, $"{Quantity.FormatLength(min.Value)} to {Quantity.FormatLength(max.Value)} in steps of {Quantity.FormatLength(step.Value)} ({lengths.Count} lengths)", lengths.Count > 1);
    }

    private static (IReadOnlyList<SimulatedLine>? Lines, WhatIfOptions Options) WhatIfSettings(Args args)
    {
        var simulate = args.Flag("simulate");
        var linesText = args.Value("lines");
        var extra = new[] { "lines", "noise", "samples", "seed" }.FirstOrDefault(n => args.Value(n) is not null);
        if (!simulate)
        {
            if (extra is not null) throw new UsageException($"plan: --{extra} describes the what-if simulation; add --simulate");
            return (null, new WhatIfOptions());
        }

        if (linesText is null) throw new UsageException("plan: --simulate needs the source's lines, e.g. --lines \"0 GHz, 3.2 GHz@0.5, 7.9 GHz@0.3\"");
        var lines = new List<SimulatedLine>();
        foreach (var raw in linesText.Split(','))
        {
            var item = raw.Trim();
            if (item.Length == 0) throw new UsageException($"plan: --lines has an empty entry in \"{linesText}\"");
            var at = item.IndexOf('@');
            var freqText = at >= 0 ? item[..at].Trim() : item;
            var intensity = 1.0;
            if (at >= 0 && (!double.TryParse(item[(at + 1)..].Trim(), NumberStyles.Float, CultureInfo.InvariantCulture, out intensity) || !(intensity > 0) || !double.IsFinite(intensity)))
                throw new UsageException($"plan: --lines: expected a positive relative intensity after '@' in \"{item}\"");
            if (!Quantity.TryParse(freqText, Dimension.Frequency, out var hz, out var error))
                throw new UsageException($"plan: --lines: entry \"{item}\": {error}");
            lines.Add(new SimulatedLine(hz, intensity));
        }

        var noise = args.Double("noise") ?? 0.004;
        if (!(noise >= 0)) throw new UsageException($"plan: --noise expects a fraction of the peak signal, zero or more, but got '{args.Value("noise")}'");
        var options = new WhatIfOptions
        {
            NoiseFraction = noise,
            Samples = args.Int("samples", 100) ?? 4000,
            Seed = args.Int("seed") ?? 1,
        };
        return (lines, options);
    }

    private static CavityGeometry? Geometry(Args args, string name)
    {
        var v = args.Value(name);
        if (v is null) return null;
        return CavityGeometryNames.TryParse(v, out var geometry)
            ? geometry
            : throw new UsageException($"plan: --{name} expects {CavityGeometryNames.Choices} but got '{v}'");
    }

    private static double? PositiveFinesse(Args args, string name)
    {
        var f = args.Double(name);
        if (f is double v && !(v >= 1)) throw new UsageException($"plan: --{name} expects a finesse of at least 1 but got '{args.Value(name)}'");
        return f;
    }
}

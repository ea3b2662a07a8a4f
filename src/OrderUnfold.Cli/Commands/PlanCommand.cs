using System.CommandLine;
using System.Globalization;
using OrderUnfold.Analysis;
using OrderUnfold.Cli.CommandLine;
using OrderUnfold.Io;
using OrderUnfold.Planning;
using OrderUnfold.Plotting;

namespace OrderUnfold.Cli.Commands;

/// <summary><c>orderunfold plan</c>: choose a second (or third) cavity length, or judge a given set of cavities.</summary>
internal sealed class PlanCommand : VerbCommand
{
    /// <summary>How many of the best two-cavity designs a three-cavity search extends.</summary>
    private const int PairsExtended = 5;

    private readonly PlanOptions _options = new();

    public PlanCommand(CliContext cli) : base("plan", "choose cavity lengths that keep aliases away over the source's span", cli)
    {
        AddOptions(_options.All);
    }

    public override string Details => """
        Chooses the length of a second (or third) cavity so that no alias comes closer than the required
        margin over the span of the source, robust to the length tolerance; or judges a given set.
          Reference cavity: --first-length or --first-fsr with --finesse (and --first-geometry), or --setup.
          Candidates: a range (--second-min, --second-max, --step) or --catalogue; or a given design
          (--second-length/--second-fsr, optionally --third-length/--third-fsr) to judge instead.
          Writes plan.csv, margin.png and candidates.png to the output folder.
          What-if: --simulate --lines "0 GHz, 3.2 GHz:0.5, 7.9 GHz:0.3" simulates the recommended design and unfolds it.
        Exit codes: 0 when the recommended design meets the margin (and the what-if recovers every line),
        1 when it does not, 2 for bad input. See docs/planning.md.
        """;

    /// <summary>The designs ranked (two cavities, and three when searched) and the one chosen.</summary>
    private sealed record PlanSearch(IReadOnlyList<DesignEvaluation> Ranked, IReadOnlyList<DesignEvaluation>? Triples, DesignEvaluation Chosen)
    {
        public IReadOnlyList<DesignEvaluation> All => Triples is null ? Ranked : Ranked.Concat(Triples).ToList();
    }

    protected override int Run(ParseResult parse, CancellationToken cancellationToken)
    {
        var request = PlanInputs.Read(parse, _options);
        PrintHeader(request);
        var search = request.Candidates is null ? Judge(request) : Search(request, request.Candidates, cancellationToken);
        var chosen = search.Chosen;

        // the what-if runs before the verdict is printed: a design whose own simulation shows ghost or missing lines
        // is not reported as ok
        var whatIf = request.WhatIfLines is { } lines ? WhatIf.Run(chosen.Instruments, lines, request.WhatIfOptions, new Progress(Error), cancellationToken) : null;
        var confirmed = whatIf is null || whatIf.Passes;
        PrintVerdict(request, chosen, whatIf);
        WriteFiles(request, search, confirmed, cancellationToken);
        if (whatIf is not null)
        {
            var o = request.WhatIfOptions;
            Out.WriteLine();
            Out.WriteLine($"What-if: simulated {request.WhatIfLines!.Count} line(s) through {chosen.Instruments.Count} cavities (noise {o.NoiseFraction.ToString("G3", CultureInfo.InvariantCulture)} of the peak, {o.Samples} samples per record, seed {o.Seed}) and unfolded");
            Out.Write(PlanReport.WhatIfSummary(whatIf));
        }

        return chosen.Passes && confirmed ? ExitCodes.Ok : ExitCodes.SomeFailed;
    }

    private void PrintHeader(PlanRequest request)
    {
        var fixedCavities = request.FixedCavities;
        var settings = request.Settings;
        Out.WriteLine("orderunfold plan");
        Out.WriteLine($"Reference: {request.Reference.Name}, {fixedCavities[0].Describe()}, finesse {PlanOptions.Number(request.Reference.Finesse)}, linewidth {Quantity.FormatFrequency(request.Reference.LinewidthHz)}");
        foreach (var c in fixedCavities.Skip(1)) Out.WriteLine($"Given:     {c.Instrument.Name}, {c.Describe()}, finesse {PlanOptions.Number(c.Instrument.Finesse)}");
        if (request.ToleranceM > 0 && fixedCavities.Skip(1).Any(c => c.Instrument.LengthM is null))
            Out.WriteLine("Note: --tolerance applies only to cavities given by a length; cavities given by their FSR are taken as exact.");
        Out.WriteLine($"Span {Quantity.FormatFrequency(settings.SpanHz)}; required margin {PlanOptions.Number(settings.ThresholdLinewidths, "G3")} linewidths" +
                      (settings.MinimumShiftHz is double ms ? $"; shifts below {Quantity.FormatFrequency(ms)} count as the line itself" : "; shifts below 2 × margin × the narrowest linewidth count as the line itself"));
    }

    /// <summary>A given design: evaluated as it is.</summary>
    private PlanSearch Judge(PlanRequest request)
    {
        var chosen = Planner.Evaluate(request.FixedCavities, request.Settings);
        Out.WriteLine();
        Out.WriteLine("The given design:");
        Out.Write(PlanReport.Table([chosen], 1));
        return new PlanSearch([chosen], null, chosen);
    }

    /// <summary>Ranks the candidates as an added cavity; extends the best pairs by a third when asked or when no pair passes.</summary>
    private PlanSearch Search(PlanRequest request, CandidateSet candidates, CancellationToken cancellationToken)
    {
        var (fixedCavities, family, settings, top) = (request.FixedCavities, request.Family, request.Settings, request.Top);
        Out.WriteLine($"Candidates: {candidates.Description}; {family.Geometry.ToString().ToLowerInvariant()}, finesse {PlanOptions.Number(family.Finesse)}" +
                      (request.ToleranceM > 0 ? $", tolerance ±{Quantity.FormatLength(request.ToleranceM)}" : ", no length tolerance"));
        var ranked = Planner.RankAddedCavity(fixedCavities, candidates.Lengths, family, settings, fixedCavities.Count == 1 ? "second" : "added", cancellationToken);
        Out.WriteLine();
        Out.WriteLine($"{(fixedCavities.Count == 1 ? "Two" : (fixedCavities.Count + 1).ToString(CultureInfo.InvariantCulture))}-cavity designs, best {Math.Min(top, ranked.Count)} of {ranked.Count}:");
        Out.Write(PlanReport.Table(ranked, top));
        var chosen = ranked[0];
        if (fixedCavities.Count > 1 || (!request.SearchThird && ranked[0].Passes)) return new PlanSearch(ranked, null, chosen);

        if (!ranked[0].Passes) Out.WriteLine($"No two-cavity design meets the margin; trying a third cavity on the best {PairsExtended}.");
        var triples = Planner.RankThirdCavity(ranked.Take(PairsExtended).ToList(), candidates.Lengths, family, settings, top, cancellationToken: cancellationToken);
        Out.WriteLine();
        Out.WriteLine($"Three-cavity designs (third cavity added to the best {PairsExtended} pairs), best {triples.Count}:");
        Out.Write(PlanReport.Table(triples, top));
        if (!chosen.Passes && triples.Count > 0 && (triples[0].Passes || triples[0].Robust.MarginLinewidths > chosen.Robust.MarginLinewidths))
            chosen = triples[0];
        return new PlanSearch(ranked, triples, chosen);
    }

    private void PrintVerdict(PlanRequest request, DesignEvaluation chosen, WhatIfResult? whatIf)
    {
        var settings = request.Settings;
        var confirmed = whatIf is null || whatIf.Passes;
        var given = request.Candidates is null;
        var limit = Math.Max(Math.Min(chosen.Repeat?.RepeatHz ?? chosen.RepeatSearchLimitHz, chosen.RepeatSearchLimitHz), settings.SpanHz);
        var unambiguous = AliasMargin.FirstBelow(chosen.Instruments, settings.ThresholdLinewidths, chosen.MinimumShiftHz, limit);
        Out.WriteLine();
        Out.WriteLine(chosen.Passes && confirmed ? (given ? "Design:" : "Recommended:") :
            chosen.Passes ? (given ? "Design (meets the margin, but its what-if simulation fails):" : "Best found (meets the margin, but its what-if simulation fails):") :
            given ? "Design (does not meet the required margin):" : "Best found (does not meet the required margin):");
        var description = PlanReport.Describe(chosen, unambiguous, limit, settings.Sampling, settings.RequiredDeltaChiSquare);
        if (chosen.Passes && !confirmed)
            description = description.Replace("  verdict: ok", "  verdict: not confirmed: the alias margin is met, but the what-if simulation below " +
                (whatIf!.AllRecovered ? $"shows {whatIf.Ghosts.Count} ghost line(s)" : "misses line(s)"));
        Out.Write(description);
    }

    /// <summary>plan.csv, and unless --no-plots the margin curve and the candidate map; complete or absent (Io/StagedFolder.cs).</summary>
    private void WriteFiles(PlanRequest request, PlanSearch search, bool confirmed, CancellationToken cancellationToken)
    {
        using var staged = StagedFolder.Create(request.OutDir);
        var written = new List<string> { Path.Combine(staged.Path, "plan.csv") };
        AtomicFile.WriteAllText(written[0], PlanReport.Csv(search.All));
        if (request.Plots)
        {
            written.Add(Path.Combine(staged.Path, "margin.png"));
            PlanPlots.SaveMarginCurve(written[^1], MarginCurve(request, search.Chosen, confirmed));
            if (request.Candidates is { } candidates)
            {
                written.Add(Path.Combine(staged.Path, "candidates.png"));
                PlanPlots.SaveCandidateMap(written[^1], CandidateMap(request, candidates, search));
            }
        }

        staged.Publish("plan.csv", cancellationToken);
        Out.WriteLine();
        Out.WriteLine("Wrote " + string.Join(", ", written.Select(staged.Final)));
    }

    private static MarginCurveInput MarginCurve(PlanRequest request, DesignEvaluation chosen, bool confirmed)
    {
        var (instruments, margin, span) = (chosen.Instruments, request.Settings.ThresholdLinewidths, request.Settings.SpanHz);
        var names = string.Join(" + ", chosen.Cavities.Select(c => c.Instrument.LengthM is double l ? Quantity.FormatLength(l) : Quantity.FormatFrequency(c.Instrument.FsrHz) + " FSR"));
        return new MarginCurveInput(
            $"Alias margin of {names} ({chosen.Cavities[0].Instrument.Geometry.ToString().ToLowerInvariant()} reference)",
            $"worst within tolerance {chosen.Robust.MarginLinewidths:0.##} linewidths at {Quantity.FormatFrequency(chosen.Robust.DeltaHz)} · verdict: {(chosen.Passes && !confirmed ? "not confirmed by the what-if" : chosen.VerdictText)} · curve at nominal lengths",
            AliasMargin.Vertices(instruments, 0, span), margin, chosen.MinimumShiftHz, AliasMargin.Aliases(instruments, margin, chosen.MinimumShiftHz, span), chosen.Nominal,
            chosen.Repeat?.RepeatHz, "worst alias at nominal lengths");
    }

    private static CandidateMapInput CandidateMap(PlanRequest request, CandidateSet candidates, PlanSearch search)
    {
        var (ranked, chosen, fixedCount, tolerance) = (search.Ranked, search.Chosen, request.FixedCavities.Count, request.ToleranceM);
        var withThird = chosen.Cavities.Count > fixedCount + 1;
        var chosenLength = chosen.Cavities.Count == fixedCount + 1 ? chosen.Added[^1].Instrument.LengthM : ranked[0].Added[^1].Instrument.LengthM;
        return new CandidateMapInput(
            $"Worst alias margin over {Quantity.FormatFrequency(request.Settings.SpanHz)} against the length of the added cavity",
            $"with {string.Join(" + ", request.FixedCavities.Select(c => c.Describe()))}" + (tolerance > 0 ? $" · tolerance ±{Quantity.FormatLength(tolerance)}" : "") +
            (withThird ? " · the chosen design has a third cavity (see plan.csv)" : ""),
            ranked.Select(d => d.Added[^1].Instrument.LengthM!.Value).ToArray(), ranked.Select(d => d.Nominal.MarginLinewidths).ToArray(),
            tolerance > 0 ? ranked.Select(d => d.Robust.MarginLinewidths).ToArray() : null,
            request.Settings.ThresholdLinewidths, chosenLength, candidates.Stepped,
            withThird ? "best two-cavity design" : chosen.Passes ? "recommended" : "best found");
    }

    private sealed class Progress(TextWriter stderr) : IProgress<string>
    {
        public void Report(string value) => stderr.WriteLine("  … " + value);
    }
}

using System.CommandLine;
using OrderUnfold.Io;
using OrderUnfold.Planning;
using OrderUnfold.Simulation;

namespace OrderUnfold.Cli.Commands;

/// <summary>Candidate lengths for a new cavity: a range or a catalogue.</summary>
/// <param name="Lengths">The lengths, in order.</param>
/// <param name="Description">What they are, for the printed header.</param>
/// <param name="Stepped">True for an even range (the candidate map joins the points).</param>
internal sealed record CandidateSet(IReadOnlyList<CandidateLength> Lengths, string Description, bool Stepped);

/// <summary>What <c>plan</c> is asked: the settings, the cavities fixed already, the candidates (if any), the what-if.</summary>
internal sealed record PlanRequest(
    PlanSettings Settings,
    double ToleranceM,
    int Top,
    IReadOnlyList<DesignCavity> FixedCavities,
    CandidateSet? Candidates,
    CavityFamily Family,
    bool SearchThird,
    IReadOnlyList<SimulatedLine>? WhatIfLines,
    WhatIfOptions WhatIfOptions,
    string OutDir,
    bool Plots)
{
    /// <summary>The reference cavity (the first fixed one).</summary>
    public Instrument Reference => FixedCavities[0].Instrument;
}

/// <summary>Reads the <c>plan</c> command line into a <see cref="PlanRequest"/>, refusing options that do not go together.</summary>
internal static class PlanInputs
{
    public static PlanRequest Read(ParseResult parse, PlanOptions o)
    {
        var span = parse.GetValue(o.Span) ?? throw new UsageException("--span is required (the largest shift to keep unambiguous, e.g. \"20 GHz\")");
        var tolerance = parse.GetValue(o.Tolerance) ?? 0;
        var settings = new PlanSettings
        {
            SpanHz = span,
            ThresholdLinewidths = parse.GetValue(o.Margin) ?? 3,
            MinimumShiftHz = parse.GetValue(o.MinShift),
            Sampling = new SweepSampling(parse.GetValue(o.SamplesPerFsr) ?? 1250, parse.GetValue(o.Passes) ?? 6),
        };
        settings.Validate();

        var fixedCavities = FixedCavities(parse, o, tolerance);
        var reference = fixedCavities[0].Instrument;
        var candidates = Candidates(parse, o);
        var family = new CavityFamily(parse.GetValue(o.SecondGeometry) ?? reference.Geometry, parse.GetValue(o.SecondFinesse) ?? reference.Finesse, tolerance);
        var third = parse.GetValue(o.Third);
        if (third && candidates is null) throw new UsageException("--third searches candidate lengths; give --second-min/--second-max/--step or --catalogue");
        if (third && fixedCavities.Count > 1)
            throw new UsageException($"--third extends two-cavity designs, but {fixedCavities.Count} cavities are given already; the search adds one more to them");
        if (candidates is null && fixedCavities.Count < 2)
            throw new UsageException("nothing to plan: give candidate lengths (--second-min/--second-max/--step or --catalogue), a second cavity (--second-length or --second-fsr), or a setup file with two or more cavities");

        var (lines, whatIf) = WhatIfSettings(parse, o);
        return new PlanRequest(settings, tolerance, parse.GetValue(o.Top) ?? 10, fixedCavities, candidates, family, third, lines, whatIf,
            parse.GetValue(o.Out) ?? "plan-out", !parse.GetValue(o.NoPlots));
    }

    private static bool Given(ParseResult parse, Option option) => parse.GetResult(option) is not null;

    private static List<DesignCavity> FixedCavities(ParseResult parse, PlanOptions o, double tolerance)
    {
        if (parse.GetValue(o.Setup) is string setupPath) return FromSetup(parse, o, setupPath, tolerance);

        var length = parse.GetValue(o.FirstLength);
        var fsr = parse.GetValue(o.FirstFsr);
        if (length is not null && fsr is not null) throw new UsageException("give the reference cavity by --first-length or --first-fsr, not both");
        if (length is null && fsr is null) throw new UsageException("the reference cavity is missing: give --first-length or --first-fsr (with --finesse), or --setup FILE");
        var finesse = parse.GetValue(o.Finesse) ?? throw new UsageException("--finesse is required with --first-length/--first-fsr (the reference cavity's finesse)");
        var geometry = parse.GetValue(o.FirstGeometry) ?? CavityGeometry.Planar;
        var first = length is double l ? Instrument.FromLength("first", l, geometry, finesse) : new Instrument("first", fsr!.Value, finesse, geometry);
        var cavities = new List<DesignCavity> { new(first) };
        var secondGeometry = parse.GetValue(o.SecondGeometry) ?? geometry;
        var secondFinesse = parse.GetValue(o.SecondFinesse) ?? finesse;
        foreach (var (name, lengthOption, fsrOption) in new[] { ("second", o.SecondLength, o.SecondFsr), ("third", o.ThirdLength, o.ThirdFsr) })
        {
            var len = parse.GetValue(lengthOption);
            var f = parse.GetValue(fsrOption);
            if (len is not null && f is not null) throw new UsageException($"give the {name} cavity by {lengthOption.Name} or {fsrOption.Name}, not both");
            if (len is null && f is null) continue;
            if (name == "third" && cavities.Count < 2) throw new UsageException("a third cavity needs a second one (--second-length or --second-fsr)");
            var inst = len is double ll ? Instrument.FromLength(name, ll, secondGeometry, secondFinesse) : new Instrument(name, f!.Value, secondFinesse, secondGeometry);
            cavities.Add(new DesignCavity(inst, len is not null ? tolerance : 0));
        }

        return cavities;
    }

    /// <summary>The cavities of a setup file: the first is the reference; the others get the tolerance when given by a length.</summary>
    private static List<DesignCavity> FromSetup(ParseResult parse, PlanOptions o, string setupPath, double tolerance)
    {
        var conflicting = new Option[] { o.FirstLength, o.FirstFsr, o.FirstGeometry, o.Finesse, o.SecondLength, o.SecondFsr, o.ThirdLength, o.ThirdFsr }
            .FirstOrDefault(option => Given(parse, option));
        if (conflicting is not null) throw new UsageException($"--setup gives the cavities; do not combine it with {conflicting.Name}");
        var setup = SetupReader.Read(setupPath);
        if (setup.Instruments.Count == 0) throw new InputException("the setup lists no [[instrument]]", setupPath);
        var list = new List<DesignCavity>();
        for (var i = 0; i < setup.Instruments.Count; i++)
        {
            var inst = setup.Instruments[i].ToInstrument();
            list.Add(new DesignCavity(inst, i > 0 && inst.LengthM is not null ? tolerance : 0));
        }

        return list;
    }

    private static CandidateSet? Candidates(ParseResult parse, PlanOptions o)
    {
        var min = parse.GetValue(o.SecondMin);
        var max = parse.GetValue(o.SecondMax);
        var step = parse.GetValue(o.Step);
        var catalogue = parse.GetValue(o.Catalogue);
        var rangeGiven = min is not null || max is not null || step is not null;
        if (catalogue is not null && rangeGiven) throw new UsageException("give candidates either as a range (--second-min/--second-max/--step) or as --catalogue, not both");
        if (catalogue is not null)
        {
            var list = CandidateCatalogue.ReadCatalogue(catalogue);
            return new CandidateSet(list, $"{list.Count} length(s) from {catalogue}", false);
        }

        if (!rangeGiven) return null;
        if (min is null || max is null || step is null)
        {
            var missing = new[] { (o.SecondMin, min), (o.SecondMax, max), (o.Step, step) }.Where(t => t.Item2 is null).Select(t => t.Item1.Name);
            throw new UsageException($"a candidate range needs --second-min, --second-max and --step; missing {string.Join(", ", missing)}");
        }

        var lengths = CandidateLengths.Range(min.Value, max.Value, step.Value);
        return new CandidateSet(lengths, $"{Quantity.FormatLength(min.Value)} to {Quantity.FormatLength(max.Value)} in steps of {Quantity.FormatLength(step.Value)} ({lengths.Count} lengths)", lengths.Count > 1);
    }

    private static (IReadOnlyList<SimulatedLine>? Lines, WhatIfOptions Options) WhatIfSettings(ParseResult parse, PlanOptions o)
    {
        if (!parse.GetValue(o.Simulate))
        {
            if (o.WhatIf.FirstOrDefault(option => Given(parse, option)) is { } extra)
                throw new UsageException($"{extra.Name} describes the what-if simulation; add --simulate");
            return (null, new WhatIfOptions());
        }

        var lines = parse.GetValue(o.Lines) ??
                    throw new UsageException($"--simulate needs the source's lines, e.g. --lines \"{CommandLine.LineList.Example}\"");
        var options = new WhatIfOptions
        {
            NoiseFraction = parse.GetValue(o.Noise) ?? 0.004,
            Samples = parse.GetValue(o.Samples) ?? 4000,
            Seed = parse.GetValue(o.Seed) ?? 1,
        };
        return (lines, options);
    }
}

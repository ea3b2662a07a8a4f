using CsCheck;
using OrderUnfold.Analysis.Modes;
using Xunit;
using static OrderUnfold.Tests.Analysis.Modes.SimulatedModes;

namespace OrderUnfold.Tests.Analysis.Modes;

/// <summary>
/// Mode analysis on simulated line lists (see <see cref="SimulatedModes"/>): gas and diode lasers, SMSR,
/// robustness to spurious lines, missing modes and a second family, and the reading of folded positions.
/// </summary>
public sealed class LaserModesTests
{
    // ------------------------------------------------------------------ gas laser, 30 cm optical length

    [Fact]
    public void GasLaser30cm_SpacingIsCOver2L()
    {
        // Mode spacing of a two-mirror standing-wave resonator, c/(2L) (B. E. A. Saleh and M. C. Teich,
        // Fundamentals of Photonics, chapter on resonator optics), with c exact (BIPM SI Brochure, 9th ed.):
        // L = 0.30 m gives 299 792 458 / 0.6 Hz = 499.654 096 67 MHz.
        var spacing = C / (2 * 0.30);
        Assert.Equal(499_654_096.67, spacing, 0.01);

        // Noise-free simulated three-mode line list: the fit returns the spacing and length exactly.
        var lines = Comb(spacing, 123e6, [-1, 0, 1], k => Envelope(k, 0.2, 3.0), 0, 0, new Random(1));
        var a = LaserModes.Analyse(Resolved(lines));
        Assert.Equal(spacing, a.Spacing!.SpacingHz, spacing * 1e-12);
        Assert.Equal(0.30, a.Spacing.OpticalLengthM, 1e-12);
        Assert.Null(a.Spacing.PhysicalLengthM);
    }

    [Theory]
    [InlineData(3, 1)]
    [InlineData(3, 2)]
    [InlineData(5, 3)]
    [InlineData(5, 4)]
    public void GasLaser30cm_ThreeAndFiveModes_GiveSpacingAndCount(int modes, int seed)
    {
        // Simulated: a 30 cm gas laser (Δ = c/2L = 499.654 MHz, c exact) under a Gaussian gain envelope
        // (FWHM 1.5 GHz for three modes, 2.5 GHz for five), positions with 0.2 MHz noise, intensities 2 %.
        var spacing = C / (2 * 0.30);
        var half = modes / 2;
        var fwhmModes = (modes == 3 ? 1.5e9 : 2.5e9) / spacing;
        var lines = Comb(spacing, 2.1e9, Enumerable.Range(-half, modes), k => Envelope(k, 0.15, fwhmModes), 0.2e6, 0.02, new Random(seed));
        var a = LaserModes.Analyse(Resolved(lines));

        Assert.NotNull(a.Comb);
        Assert.Equal(modes, a.Comb!.MemberCount);
        Assert.Empty(a.Comb.MissingK);
        Assert.Equal(modes, a.Count.Total);
        Assert.Equal(modes, a.Count.MainComb);
        var s = a.Spacing!;
        Assert.InRange(Math.Abs(s.SpacingHz - spacing), 0, 4 * s.SigmaHz!.Value);
        Assert.InRange(Math.Abs(s.SpacingHz / spacing - 1), 0, 1e-3);
        Assert.InRange(Math.Abs(s.OpticalLengthM / 0.30 - 1), 0, 1e-3);
        Assert.Contains(a.Comb.Basis, new[] { UncertaintyBasis.LineSigmas, UncertaintyBasis.LineSigmasScaled });
        // Mode indices follow the frequency order, 0 at the strongest line.
        var modesByFrequency = a.Modes.OrderBy(m => m.FrequencyHz).Select(m => m.K!.Value).ToList();
        Assert.Equal(modesByFrequency.OrderBy(k => k), modesByFrequency);
        Assert.Equal(0, a.MainLine.K);
    }

    // ------------------------------------------------------------------ Fabry–Pérot diode laser, nine modes

    /// <summary>Simulated FP diode chip: physical length 0.8 mm, group index 3.6 (stated, a typical value for a
    /// III–V chip), optical length 2.88 mm, Δ = c / (2 · 2.88 mm) = 52.047 GHz: about 35 FSRs of a 1.5 GHz cavity.</summary>
    private const double ChipLength = 0.8e-3;

    private const double GroupIndex = 3.6;
    private const double CavityFsr = 1.5e9;
    private static readonly double DiodeSpacing = C / (2 * GroupIndex * ChipLength);
    private const double EnvelopeCentreK = 0.3;
    private const double EnvelopeFwhmModes = 4.5;

    private static List<ModeInputLine> DiodeLines(int seed, IEnumerable<int>? ks = null, double sigmaHz = 5e6) =>
        Comb(DiodeSpacing, -3.7e9, ks ?? Enumerable.Range(-4, 9), k => Envelope(k, EnvelopeCentreK, EnvelopeFwhmModes), sigmaHz, 0.02, new Random(seed));

    [Theory]
    [InlineData(11)]
    [InlineData(12)]
    [InlineData(13)]
    [InlineData(14)]
    public void DiodeLaser_NineModesManyFsrsApart_SpacingWithinPointOnePercent(int seed)
    {
        var lines = DiodeLines(seed);
        // The modes are many FSRs of the analysing cavity apart: folded into one FSR their order is scrambled.
        Assert.True(DiodeSpacing / CavityFsr > 30);
        var folded = lines.Select(l => ((l.FrequencyHz % CavityFsr) + CavityFsr) % CavityFsr).ToList();
        Assert.NotEqual(folded.OrderBy(x => x), folded);

        var a = LaserModes.Analyse(Resolved(lines), new ModeAnalysisOptions { GroupIndex = GroupIndex });

        // Spacing within 0.1 % (and within 4 standard errors); the chip length follows.
        var s = a.Spacing!;
        Assert.InRange(Math.Abs(s.SpacingHz / DiodeSpacing - 1), 0, 1e-3);
        Assert.InRange(Math.Abs(s.SpacingHz - DiodeSpacing), 0, 4 * s.SigmaHz!.Value);
        Assert.InRange(Math.Abs(s.PhysicalLengthM!.Value / ChipLength - 1), 0, 1e-3);
        Assert.Equal(GroupIndex * s.PhysicalLengthM.Value, s.OpticalLengthM, 1e-15);

        // Every mode found, each at its own index.
        Assert.Equal(9, a.Comb!.MemberCount);
        Assert.Empty(a.Comb.MissingK);
        Assert.All(a.Lines, l => Assert.Equal(LineRole.MainComb, l.Role));
        var main = a.MainLine;
        foreach (var l in a.Lines)
            Assert.Equal((int)Math.Round((l.FrequencyHz - main.FrequencyHz) / DiodeSpacing), l.K);

        // Envelope centre and width (simulated: centre 0.3 modes above the mode nearest to it, FWHM 4.5 modes).
        var e = a.Envelope;
        Assert.True(e.Fitted, e.Message);
        var trueCentreHz = -3.7e9 + EnvelopeCentreK * DiodeSpacing;
        Assert.InRange(Math.Abs(e.CentreHz!.Value - trueCentreHz), 0, Math.Max(4 * e.CentreSigmaHz!.Value, 0.02 * DiodeSpacing));
        Assert.InRange(Math.Abs(e.CentreHz.Value - trueCentreHz), 0, 0.1 * DiodeSpacing);
        Assert.InRange(Math.Abs(e.FwhmHz!.Value / (EnvelopeFwhmModes * DiodeSpacing) - 1), 0, 0.05);
        Assert.InRange(Math.Abs(e.FwhmHz.Value - EnvelopeFwhmModes * DiodeSpacing), 0, 4 * e.FwhmSigmaHz!.Value);
        Assert.True(e.CentreWithinModes);
        Assert.Equal(9, a.Count.Total);
    }

    [Fact]
    public void CombIrregularity_IsTheResidualFromTheFittedComb()
    {
        // Simulated dispersion: the spacing grows by 20 MHz per mode; noise-free positions, equal sigmas.
        const double d = 50e9;
        const double change = 20e6;
        var lines = Enumerable.Range(-4, 9).Select(k =>
            new ModeInputLine(k * d + 0.5 * change * k * (k - 1), 1e6, Envelope(k, 0, 6), 0.01, null)).ToList();
        var a = LaserModes.Analyse(Resolved(lines));
        var c = a.Comb!;
        Assert.Equal(change, c.StepChangePerModeHz!.Value, 1.0);
        // The straight-line fit leaves a parabola: residuals are tens of MHz, and they are what is reported.
        var residuals = a.Modes.Select(m => m.ResidualHz!.Value).ToArray();
        Assert.Equal(Math.Sqrt(residuals.Average(r => r * r)), c.RmsResidualHz, 1e-3);
        Assert.Equal(residuals.Max(Math.Abs), c.MaxAbsResidualHz, 1e-3);
        Assert.InRange(c.RmsResidualHz, 10e6, 200e6);
        Assert.Equal(UncertaintyBasis.LineSigmasScaled, c.Basis);
        Assert.True(c.ReducedChiSquared > 1);
    }

    // ------------------------------------------------------------------ robustness

    [Theory]
    [InlineData(21)]
    [InlineData(22)]
    [InlineData(23)]
    public void SpuriousLinesAndMissingModes_DoNotDisturbTheComb(int seed)
    {
        // Simulated: modes k = −1 and +3 missing; four spurious lines off the comb, one of them strong.
        var ks = new[] { -4, -3, -2, 0, 1, 2, 4 };
        var lines = DiodeLines(seed, ks);
        var mainHz = lines[Array.IndexOf(ks, 0)].FrequencyHz;
        var spurious = new[]
        {
            new ModeInputLine(mainHz + 0.37 * DiodeSpacing, 5e6, 0.16, 0.003, 30),
            new ModeInputLine(mainHz - 2.58 * DiodeSpacing, 5e6, 0.04, 0.002, 10),
            new ModeInputLine(mainHz + 1.71 * DiodeSpacing, 5e6, 0.02, 0.001, 6),
            new ModeInputLine(mainHz + 7.44 * DiodeSpacing, 5e6, 0.01, 0.001, 4),
        };
        var a = LaserModes.Analyse(Resolved(lines.Concat(spurious)));

        Assert.InRange(Math.Abs(a.Spacing!.SpacingHz / DiodeSpacing - 1), 0, 1e-3);
        Assert.Equal(7, a.Comb!.MemberCount);
        Assert.Equal([-1, 3], a.Comb.MissingK);
        Assert.All(a.Lines.Skip(lines.Count), l => Assert.NotEqual(LineRole.MainComb, l.Role));
        Assert.All(a.Lines.Take(lines.Count), l => Assert.Equal(LineRole.MainComb, l.Role));
        Assert.Contains(a.Notes, n => n.Contains("-1") && n.Contains("+3"));
    }

    [Fact]
    public void ALineHalfwayBetweenModes_DoesNotHalveTheSpacing()
    {
        // Simulated three-mode gas laser plus one weak spurious line exactly halfway between two modes: a comb of
        // half the spacing would hold all four lines, but with one empty slot; the true comb must win.
        var spacing = C / (2 * 0.30);
        var lines = Comb(spacing, 0, [-1, 0, 1], k => Envelope(k, 0.1, 3), 0.3e6, 0.02, new Random(5));
        lines.Add(new ModeInputLine(0.5 * spacing, 0.3e6, 0.01, 0.001, 10));
        var a = LaserModes.Analyse(Resolved(lines));
        Assert.Equal(spacing, a.Spacing!.SpacingHz, spacing * 1e-3);
        Assert.Equal(LineRole.OffComb, a.Lines[3].Role);
    }

    [Fact]
    public void SecondFamily_IsFoundWithItsOffset()
    {
        // Simulated: nine main modes and a transverse-mode family of five lines offset by 0.30 of the spacing,
        // about 15 dB down, plus one spurious line.
        var main = DiodeLines(31);
        var rng = new Random(32);
        var family = Comb(DiodeSpacing, -3.7e9 + 0.30 * DiodeSpacing, Enumerable.Range(-2, 5), k => 0.03 * Envelope(k, 0, 4), 5e6, 0.02, rng);
        var spurious = new ModeInputLine(-3.7e9 + 2.81 * DiodeSpacing, 5e6, 0.01, 0.001, 5);
        var a = LaserModes.Analyse(Resolved(main.Concat(family).Append(spurious)));

        Assert.InRange(Math.Abs(a.Spacing!.SpacingHz / DiodeSpacing - 1), 0, 1e-3);
        Assert.Equal(9, a.Comb!.MemberCount);
        var sf = a.SecondFamily!;
        Assert.NotNull(sf);
        Assert.Equal(5, sf.MemberCount);
        Assert.InRange(Math.Abs(sf.OffsetFraction - 0.30), 0, 0.01);
        Assert.InRange(Math.Abs(sf.OffsetFraction - 0.30), 0, 4 * sf.OffsetFractionSigma!.Value);
        Assert.Equal(sf.OffsetFraction * a.Comb.StepHz, sf.OffsetHz, 1e-3);
        Assert.InRange(sf.StrongestRelativeDb, -17, -13);
        Assert.All(a.Lines.Skip(9).Take(5), l => Assert.Equal(LineRole.SecondFamily, l.Role));
        Assert.Equal(LineRole.OffComb, a.Lines[^1].Role);
        Assert.Equal(9, a.Count.MainComb);
        Assert.Equal(5, a.Count.SecondFamily);
    }

    [Fact]
    public void CombRecovery_Property_RandomSpacingsGapsAndSpuriousLines()
    {
        // Simulated combs: spacing 0.3–100 GHz, 4–12 modes, one missing mode, two spurious lines, position noise
        // 0.05 % of the spacing. The spacing must come back within 0.1 %.
        Gen.Select(Gen.Int[4, 12], Gen.Double[0.3e9, 100e9], Gen.Int[0, 1_000_000]).Sample(t =>
        {
            var (n, d, seed) = t;
            var rng = new Random(seed);
            var ks = Enumerable.Range(0, n).Where(k => k != n / 2 + 1 || n < 5).ToList();
            var lines = Comb(d, 1e9 * rng.NextDouble(), ks, k => Envelope(k, n / 2.0, n), 5e-4 * d, 0.02, rng);
            lines.Add(new ModeInputLine(lines[0].FrequencyHz + (0.3 + 0.2 * rng.NextDouble()) * d, 5e-4 * d, 0.05, 0.005, 5));
            lines.Add(new ModeInputLine(lines[^2].FrequencyHz + (1.35 + 0.2 * rng.NextDouble()) * d, 5e-4 * d, 0.03, 0.005, 5));
            var a = LaserModes.Analyse(Resolved(lines));
            Assert.InRange(Math.Abs(a.Spacing!.SpacingHz / d - 1), 0, 1e-3);
        }, iter: 60);
    }

    [Fact]
    public void WithoutSigmas_UncertaintiesComeFromTheScatter()
    {
        var spacing = C / (2 * 0.30);
        var lines = Comb(spacing, 0, Enumerable.Range(-2, 5), k => Envelope(k, 0.1, 5), 0.5e6, 0.02, new Random(9))
            .Select(l => l with { FrequencySigmaHz = null, IntensitySigma = null }).ToList();
        var a = LaserModes.Analyse(Resolved(lines));
        Assert.Equal(UncertaintyBasis.Scatter, a.Comb!.Basis);
        Assert.NotNull(a.Spacing!.SigmaHz);
        Assert.Null(a.Comb.ReducedChiSquared);
        Assert.Null(a.Smsr.SigmaDb);
        Assert.Equal(UncertaintyBasis.Scatter, a.Envelope.Basis);
    }

    // ------------------------------------------------------------------ SMSR

    [Fact]
    public void Smsr_IsTenLog10OfThePowerRatio()
    {
        // SMSR = 10·log10(P_main / P_side), the ratio of the largest peak to the second largest (ITU-T G.957,
        // definition of the side-mode suppression ratio). Known case: 1 against 1e-3 is 30 dB exactly; with
        // relative sigmas 1 % and 10 % the propagated sigma is (10/ln 10)·√(0.01² + 0.1²) = 0.43646 dB.
        var lines = new List<ModeInputLine>
        {
            new(0, 1e6, 1.0, 0.01, 100),
            new(150e9, 1e6, 1e-3, 1e-4, 10),
            new(-150e9, 1e6, 1e-4, 1e-5, 3),
        };
        var a = LaserModes.Analyse(Resolved(lines, detectionLimit: 5e-5));
        Assert.Equal(SmsrKind.Measured, a.Smsr.Kind);
        Assert.Equal(30.0, a.Smsr.ValueDb!.Value, 12);
        Assert.Equal(10 / Math.Log(10) * Math.Sqrt(0.01 * 0.01 + 0.1 * 0.1), a.Smsr.SigmaDb!.Value, 12);
        Assert.Equal(0.43646, a.Smsr.SigmaDb.Value, 5);
        Assert.Equal(1, a.Smsr.SideLineIndex);
        Assert.Equal(-30.0, a.Lines[1].RelativeDb!.Value, 12);
        Assert.Equal(-40.0, a.Lines[2].RelativeDb!.Value, 12);
        Assert.Equal(1, a.Count.Total);
    }

    [Fact]
    public void Smsr_SideModeBelowDetectionLimit_GivesALowerBound()
    {
        // Simulated single-mode laser whose true side mode is 50 dB down; the measurement sees down to 1e-3 of the
        // strongest (30 dB), so the side mode is not in the line list: the SMSR is known only to be ≥ 30 dB.
        const double trueSide = 1e-5;
        const double detection = 1e-3;
        Assert.True(trueSide < detection);
        var lines = new List<ModeInputLine> { new(0, 1e6, 1.0, 0.01, 1000) };
        var a = LaserModes.Analyse(Resolved(lines, detection));
        Assert.Equal(SmsrKind.LowerBound, a.Smsr.Kind);
        Assert.Equal(30.0, a.Smsr.ValueDb!.Value, 12);
        Assert.True(a.Smsr.ValueDb <= 10 * Math.Log10(1 / trueSide));
        Assert.Null(a.Smsr.SideLineIndex);
        Assert.Null(a.Comb);
        Assert.Null(a.Spacing);
        Assert.Equal(1, a.Count.Total);

        Assert.True(ModeCheck.Check(a, new ModeRequirements(MinSmsrDb: 30)).Passed);
        var fail = ModeCheck.Check(a, new ModeRequirements(MinSmsrDb: 35));
        Assert.False(fail.Passed);
        Assert.StartsWith("FAIL: SMSR only shown to be ≥ 30 dB", fail.Line);

        // No detection limit: nothing can be said, and a requirement cannot be shown to pass.
        var unknown = LaserModes.Analyse(Resolved(lines, detectionLimit: null));
        Assert.Equal(SmsrKind.Unbounded, unknown.Smsr.Kind);
        Assert.Null(unknown.Smsr.ValueDb);
        Assert.False(ModeCheck.Check(unknown, new ModeRequirements(MinSmsrDb: 10)).Passed);
    }

    [Fact]
    public void Verdict_CombinesRequirements_FailuresFirst()
    {
        var lines = new List<ModeInputLine>
        {
            new(0, 1e6, 1.0, 0.01, 100),
            new(50e9, 1e6, 0.02, 0.001, 20),   // −17 dB
            new(-50e9, 1e6, 0.005, 0.0005, 8), // −23 dB
        };
        var a = LaserModes.Analyse(Resolved(lines));
        Assert.Equal(2, a.Count.Total);
        var v = ModeCheck.Check(a, new ModeRequirements(MinSmsrDb: 15, MaxModes: 1));
        Assert.False(v.Passed);
        Assert.Equal("FAIL: 2 lines within 20 dB > 1 allowed; SMSR 16.99 ± 0.22 dB ≥ 15 dB", v.Line);
        Assert.True(ModeCheck.Check(a, new ModeRequirements(MinSmsrDb: 15, MaxModes: 2)).Passed);
        Assert.Equal("PASS: no requirement stated", ModeCheck.Check(a, new ModeRequirements()).Line);
        var narrow = LaserModes.Analyse(Resolved(lines), new ModeAnalysisOptions { WithinDb = 10 });
        Assert.Equal(1, narrow.Count.Total);
    }

    // ------------------------------------------------------------------ envelope

    [Fact]
    public void Envelope_NoiseFreeGaussian_IsRecoveredExactly()
    {
        const double d = 40e9;
        var lines = Enumerable.Range(-3, 8).Select(k => new ModeInputLine(k * d, null, Envelope(k, 0.8, 3.7), null, null)).ToList();
        var a = LaserModes.Analyse(Resolved(lines));
        var e = a.Envelope;
        Assert.True(e.Fitted);
        // The strongest line is k = 1 of the simulation: the centre is 0.8 − 1 = −0.2 modes from it.
        Assert.Equal(-0.2, e.CentreK!.Value, 9);
        Assert.Equal(3.7, e.FwhmModes!.Value, 9);
        Assert.Equal(0.8 * d, e.CentreHz!.Value, 1e-3);
        Assert.Equal(3.7 * d, e.FwhmHz!.Value, 1e-2);
        // Peak of the envelope relative to the strongest mode: 10·log10 of 1/Envelope(1) > 0.
        Assert.Equal(-10 * Math.Log10(Envelope(1, 0.8, 3.7)), e.PeakRelativeDb!.Value, 9);
    }

    [Fact]
    public void Envelope_NeedsAPeakAndThreeModes()
    {
        const double d = 40e9;
        var rising = Enumerable.Range(0, 5).Select(k => new ModeInputLine(k * d, 1e6, Math.Exp(0.3 * k * k), 0.01, null)).ToList();
        var a = LaserModes.Analyse(Resolved(rising));
        Assert.False(a.Envelope.Fitted);
        Assert.Contains("do not fall off", a.Envelope.Message);

        var two = LaserModes.Analyse(Resolved([new(0, 1e6, 1, 0.01, null), new(d, 1e6, 0.5, 0.01, null)]));
        Assert.False(two.Envelope.Fitted);
        Assert.Contains("three modes", two.Envelope.Message);
        Assert.Equal(d, two.Spacing!.SpacingHz, 1e-3);
    }

    // ------------------------------------------------------------------ one cavity: folded positions

    [Theory]
    [InlineData(3, 2.0e9, 41)]
    [InlineData(3, 2.0e9, 42)]
    [InlineData(5, 3.0e9, 43)]
    public void Folded_SpacingBelowFsr_OneCavitySuffices(int modes, double fsr, int seed)
    {
        // Simulated 30 cm gas laser seen by one cavity whose FSR is larger than the laser's whole spectrum.
        var spacing = C / (2 * 0.30);
        var half = modes / 2;
        var lines = Comb(spacing, 0.87e9, Enumerable.Range(-half, modes), k => Envelope(k, 0.15, 2.5e9 / spacing), 0.5e6, 0.02, new Random(seed));
        var a = LaserModes.Analyse(Folded(lines, fsr));

        Assert.False(a.OrdersResolved);
        var f = a.Folded!;
        Assert.True(f.WithinOneFsr);
        Assert.NotNull(f.Chosen);
        Assert.Equal(0, f.Chosen!.FsrMultiple);
        Assert.Contains("narrower than the FSR", f.ChoiceReason);
        Assert.InRange(Math.Abs(a.Spacing!.SpacingHz / spacing - 1), 0, 1e-3);
        Assert.Equal(modes, a.Comb!.MemberCount);
        Assert.Equal(modes, a.Count.Total);
        // The modes are read back in frequency order, Δ apart.
        var read = a.Modes.Select(m => m.ReadFrequencyHz!.Value).ToList();
        for (var i = 1; i < read.Count; i++) Assert.InRange(read[i] - read[i - 1], spacing - 5e6, spacing + 5e6);
    }

    [Fact]
    public void Folded_SpacingAboveFsr_ListsCandidatesAndSaysHowToSettleIt()
    {
        var lines = DiodeLines(51, sigmaHz: 2e6);
        var input = Folded(lines, CavityFsr);
        var a = LaserModes.Analyse(input, new ModeAnalysisOptions { GroupIndex = GroupIndex });
        var f = a.Folded!;

        // δ is the spacing modulo the FSR, folded into (0, FSR/2]: 52.047 GHz = 35 × 1.5 GHz − 452.7 MHz.
        var r = DiodeSpacing % CavityFsr;
        var expectedDelta = Math.Min(r, CavityFsr - r);
        Assert.InRange(Math.Abs(f.FoldedStepHz - expectedDelta), 0, Math.Max(4 * f.FoldedStepSigmaHz!.Value, 1e6));
        Assert.False(f.WithinOneFsr);
        Assert.Null(f.Chosen);
        Assert.Null(a.Spacing);
        Assert.Contains("ambiguous", f.ChoiceReason);
        Assert.Contains("modulo", f.Ambiguity);
        Assert.Contains("second cavity", f.SecondCavity, StringComparison.OrdinalIgnoreCase);
        Assert.NotNull(f.SuggestedSecondFsrHz);
        Assert.True(f.SuggestedSeparationHz > 50e6);

        // Every candidate folds back onto ±δ: j·Δ ≡ ±δ (mod FSR).
        Assert.True(f.Candidates.Count(c => c.Divisor == 1) == 12);
        Assert.Contains(f.Candidates, c => c.Divisor > 1);
        foreach (var c in f.Candidates)
        {
            var m = (c.SpacingHz * c.Divisor) % CavityFsr;
            var folded = Math.Min(m, CavityFsr - m);
            Assert.Equal(f.FoldedStepHz, folded, 1e-3);
            Assert.Equal(C / (2 * c.SpacingHz), c.OpticalLengthM, 1e-15);
        }

        // What does not depend on the spacing is still measured: every mode, the count, the SMSR, the width in modes.
        Assert.Equal(9, a.Comb!.MemberCount);
        Assert.Equal(9, a.Count.Total);
        Assert.Equal(SmsrKind.Measured, a.Smsr.Kind);
        Assert.InRange(a.Envelope.FwhmModes!.Value, 4.2, 4.8);
        Assert.Null(a.Envelope.FwhmHz);
    }

    [Fact]
    public void Folded_WithASpacingRange_PicksTheOnlyCandidateOrSaysHowManyRemain()
    {
        var lines = DiodeLines(52, sigmaHz: 2e6);
        var input = Folded(lines, CavityFsr);

        // Range 51.8–52.3 GHz (say, from the chip's design length): one candidate, the true spacing.
        var narrow = LaserModes.Analyse(input, new ModeAnalysisOptions { SpacingMinHz = 51.8e9, SpacingMaxHz = 52.3e9, GroupIndex = GroupIndex });
        var chosen = narrow.Folded!.Chosen!;
        Assert.Equal(35, chosen.FsrMultiple);
        Assert.Equal(-1, chosen.Sign);
        Assert.InRange(Math.Abs(narrow.Spacing!.SpacingHz / DiodeSpacing - 1), 0, 1e-3);
        Assert.InRange(Math.Abs(narrow.Spacing.PhysicalLengthM!.Value / ChipLength - 1), 0, 1e-3);
        Assert.InRange(Math.Abs(narrow.Envelope.FwhmHz!.Value / (EnvelopeFwhmModes * DiodeSpacing) - 1), 0, 0.08);
        // Unfolded under the chosen spacing, the modes come back Δ apart and in frequency order.
        var read = narrow.Modes.Select(m => m.ReadFrequencyHz!.Value).ToList();
        var truth = lines.Select(l => l.FrequencyHz).OrderBy(x => x).ToList();
        for (var i = 0; i < read.Count; i++)
            Assert.InRange(read[i] - read[0] - (truth[i] - truth[0]), -0.001 * DiodeSpacing, 0.001 * DiodeSpacing);

        // Range 50–54 GHz: five candidates (m = 34 ± δ, 35 ± δ, 36 − δ) remain and none is chosen.
        var wide = LaserModes.Analyse(input, new ModeAnalysisOptions { SpacingMinHz = 50e9, SpacingMaxHz = 54e9 });
        Assert.Null(wide.Folded!.Chosen);
        Assert.Equal(5, wide.Folded.Candidates.Count(c => c.Divisor == 1));
        Assert.Contains(wide.Folded.Candidates, c => c.Divisor == 1 && Math.Abs(c.SpacingHz / DiodeSpacing - 1) < 1e-3);
        Assert.Contains("5 candidates", wide.Folded.ChoiceReason);
    }

    [Fact]
    public void FoldedStep_Property_RandomSpacingsAndFsrs()
    {
        // Simulated: spacing 2–100 GHz, one cavity of FSR 1–3 GHz, 5–9 modes, position noise 1 MHz. Cases where
        // two modes fold within 3 % of an FSR of each other (j·δ near a multiple of the FSR for j < n) are skipped,
        // as one cavity cannot separate them, and so are modes spread evenly round the FSR (n·δ or (n + 1)·δ near a
        // multiple of it: all slots filled, or all but one, e.g. 9 modes with 10·δ = FSR), which any step δ·j describes
        // as well. The folded step must come back within 4 standard errors (≥ 2 MHz), and a
        // spacing below six FSRs must be among the listed candidates.
        Gen.Select(Gen.Double[2e9, 100e9], Gen.Double[1e9, 3e9], Gen.Int[5, 9], Gen.Int[0, 1_000_000]).Sample(t =>
        {
            var (d, fsr, n, seed) = t;
            var r = d % fsr;
            var delta = Math.Min(r, fsr - r);
            for (var j = 1; j <= n + 1; j++)
            {
                var m = j * delta % fsr;
                if (Math.Min(m, fsr - m) < 0.03 * fsr) return;
            }

            var rng = new Random(seed);
            var lines = Comb(d, 5e9 * rng.NextDouble(), Enumerable.Range(0, n), k => Envelope(k, n / 2.0, n), 1e6, 0.02, rng);
            var a = LaserModes.Analyse(Folded(lines, fsr));
            Assert.Equal(n, a.Comb!.MemberCount);
            Assert.InRange(Math.Abs(a.Folded!.FoldedStepHz - delta), 0, Math.Max(2e6, 4 * a.Folded.FoldedStepSigmaHz!.Value));
            if (d < 6 * fsr)
                Assert.Contains(a.Folded.Candidates, c => c.Divisor == 1 && Math.Abs(c.SpacingHz / d - 1) < 1e-3);
        }, iter: 60);
    }

    [Fact]
    public void Folded_TwoModes_CannotTellDeltaFromFsrMinusDelta()
    {
        var lines = new List<ModeInputLine> { new(0.2e9, 1e6, 1, 0.01, null), new(0.9e9, 1e6, 0.5, 0.01, null) };
        var a = LaserModes.Analyse(new ModeInput(lines, 1e-3, false, 2e9, null));
        Assert.Null(a.Folded!.Chosen);
        Assert.Equal(0.7e9, a.Folded.FoldedStepHz, 1e-3);
        Assert.Contains("FSR − δ", a.Folded.ChoiceReason);
    }

    // ------------------------------------------------------------------ input checks

    [Fact]
    public void BadInput_IsAnInputException()
    {
        Assert.Throws<InputException>(() => LaserModes.Analyse(Resolved([])));
        Assert.Throws<InputException>(() => LaserModes.Analyse(Resolved([new(double.NaN, null, 1, null, null)])));
        Assert.Throws<InputException>(() => LaserModes.Analyse(Resolved([new(0, -1, 1, null, null)])));
        Assert.Throws<InputException>(() => LaserModes.Analyse(Resolved([new(0, null, 0, null, null)])));
        Assert.Throws<InputException>(() => LaserModes.Analyse(new ModeInput([new(0, null, 1, null, null)], null, false, null, null)));
        var e = Assert.Throws<InputException>(() => LaserModes.Analyse(Resolved([new(0, null, 1, null, null)], detectionLimit: 2)));
        Assert.Contains("(0, 1]", e.Message);
        Assert.Throws<InputException>(() => LaserModes.Analyse(Resolved([new(0, null, 1, null, null)]), new ModeAnalysisOptions { GroupIndex = -1 }));
    }

    [Fact]
    public void NonPositiveLines_AreLeftOutWithANote()
    {
        var lines = new List<ModeInputLine> { new(0, 1e6, 1, 0.01, null), new(40e9, 1e6, 0.5, 0.01, null), new(20e9, 1e6, -0.01, 0.01, null) };
        var a = LaserModes.Analyse(Resolved(lines));
        Assert.Equal(LineRole.Excluded, a.Lines[2].Role);
        Assert.Null(a.Lines[2].RelativeDb);
        Assert.Contains(a.Notes, n => n.Contains("≤ 0"));
        Assert.Equal(40e9, a.Spacing!.SpacingHz, 1e-3);
    }
}

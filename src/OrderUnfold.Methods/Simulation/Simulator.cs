using System.Globalization;
using System.Text;
using OrderUnfold.Instruments;

namespace OrderUnfold.Simulation;

/// <summary>A line of a simulated source.</summary>
/// <param name="FrequencyHz">Frequency relative to an arbitrary origin, Hz.</param>
/// <param name="Intensity">Relative intensity.</param>
/// <param name="WidthHz">Intrinsic Lorentzian FWHM, Hz (0 for a narrow line).</param>
public sealed record SimulatedLine(double FrequencyHz, double Intensity, double WidthHz = 0);

/// <summary>
/// A transverse-mode family of a simulated cavity: its resonances lie <paramref name="OffsetFsr"/> of an FSR above the
/// TEM00 resonance of the same order (for a two-mirror cavity N·arccos(±√(g₁g₂))/π mod 1, Siegman, <i>Lasers</i>,
/// ch. 19), so along increasing scan a line shows this family (1 − OffsetFsr) of an FSR after each TEM00 peak, with
/// <paramref name="RelativeHeight"/> times the TEM00 peak height.
/// </summary>
public sealed record TransverseFamily(double OffsetFsr, double RelativeHeight);

/// <summary>How one cavity is swept in the simulation.</summary>
public sealed record SimulatedCavity
{
    /// <summary>The simulated cavity (its true FSR and finesse).</summary>
    public required Instrument Instrument { get; init; }

    /// <summary>Sweep span in FSRs for one ramp direction.</summary>
    public double SpanFsr { get; init; } = 3.2;

    /// <summary>Samples in the whole record (both directions when the ramp is a triangle).</summary>
    public int Samples { get; init; } = 8000;

    /// <summary>Quadratic piezo non-linearity: f(v) = S·(v + a₂(v² − v) + a₃(v³ − v)) for the normalised ramp v ∈ [0, 1].</summary>
    public double Quadratic { get; init; } = 0.05;

    /// <summary>Cubic piezo non-linearity a₃.</summary>
    public double Cubic { get; init; } = 0.02;

    /// <summary>Hysteresis: the down ramp adds h·S·v(1 − v).</summary>
    public double Hysteresis { get; init; } = 0.03;

    /// <summary>Detector gain (signal units per unit intensity at peak transmission).</summary>
    public double Gain { get; init; } = 1.0;

    /// <summary>Detector offset, V.</summary>
    public double DetectorOffset { get; init; } = 0.02;

    /// <summary>Transverse families excited besides TEM00 (every line, calibration laser included, shows each). Default none.</summary>
    public IReadOnlyList<TransverseFamily> Families { get; init; } = [];
}

/// <summary>What to simulate.</summary>
public sealed record SimulationSpec
{
    /// <summary>The source's lines (absolute frequencies on any origin, intensities).</summary>
    public required IReadOnlyList<SimulatedLine> Lines { get; init; }
    /// <summary>The cavities, one record (and calibration record) each.</summary>
    public required IReadOnlyList<SimulatedCavity> Cavities { get; init; }

    /// <summary>Gaussian noise σ as a fraction of the largest noiseless signal.</summary>
    public double NoiseFraction { get; init; } = 0.004;

    /// <summary>Digitiser resolution in bits (0: no quantisation).</summary>
    public int Bits { get; init; } = 8;

    /// <summary>True: a triangle ramp (up then down) in each record; false: a single up ramp.</summary>
    public bool Triangle { get; init; } = true;

    /// <summary>Time between samples, s.</summary>
    public double SampleIntervalS { get; init; } = 2e-6;

    /// <summary>Write a calibration sweep (single-frequency laser) per cavity.</summary>
    public bool CalibrationSweeps { get; init; } = true;

    /// <summary>Calibration laser wavelength (null: the source's).</summary>
    public double? CalibrationWavelengthM { get; init; }

    /// <summary>Source wavelength (only matters with a calibration laser of another wavelength).</summary>
    public double? SourceWavelengthM { get; init; }

    /// <summary>Seed of the random numbers (noise, offsets): the same seed gives the same files.</summary>
    public int Seed { get; init; } = 1;

    /// <summary>Text that says where the data came from; written into each file's preamble.</summary>
    public string Label { get; init; } = "SIMULATED DATA (OrderUnfold simulator)";

    /// <summary>
    /// Dynamic response of a swept cavity: instead of the static Airy transmission, the intracavity field of each
    /// line (and family) is integrated on the sample grid, da/dt = (−1/τ + i·2π·Δ(t))·a + 1/τ, with τ = 1/(π·linewidth)
    /// the field decay time and Δ(t) the line's detuning from the nearest resonance; the detector sees |a|² (1 on
    /// resonance in the slow limit, a Lorentzian of the cavity linewidth). A sweep that crosses a resonance in less
    /// than a few τ rings on its trailing side. Lines with an intrinsic width are refused in this mode.
    /// </summary>
    public bool RingDown { get; init; }

    /// <summary>
    /// Where the digitiser's range ends, as a multiple of the largest noiseless signal above the detector offset;
    /// null: 1.15 (no clipping). Below 1 the highest peaks are clipped at full scale (also without quantisation).
    /// </summary>
    public double? FullScale { get; init; }

    /// <summary>The FSR written into the setup is the simulated one times this (a datasheet error). Default 1.</summary>
    public double StatedFsrFactor { get; init; } = 1.0;

    /// <summary>The finesse written into the setup is the simulated one times this (a poor guess). Default 1.</summary>
    public double StatedFinesseFactor { get; init; } = 1.0;

    /// <summary>Write each channel to its own file (signal, ramp), each with a header block, as some scopes do; the
    /// setup then names the ramp's file with ramp_file. Default false: one file with time, ramp and signal.</summary>
    public bool SplitChannels { get; init; }
}

/// <summary>One simulated record: time, ramp voltage, detector signal, and the true scan shift for tests.</summary>
public sealed record SimulatedTrace(double[] TimeS, double[] RampV, double[] Signal, double[] TrueScanHz, double OffsetHz);


/// <summary>
/// Synthetic scanning-cavity records: Airy transmission of a line source through each cavity while a
/// non-linear, hysteretic piezo ramps the spacing, with detector offset, Gaussian noise and digitiser
/// quantisation. Used by the tests, the demo and anyone who wants to see a planned measurement.
/// </summary>
public static class Simulator
{
    /// <summary>Peak of the simulated piezo ramp monitor, V.</summary>
    public const double RampMaxV = 10.0;

    /// <summary>Simulates one record of a cavity. Calibration records see a single line at the origin.</summary>
    public static SimulatedTrace Trace(SimulationSpec spec, SimulatedCavity cavity, bool calibration, Random rng)
    {
        var inst = cavity.Instrument;
        var n = cavity.Samples;
        var t = new double[n];
        var ramp = new double[n];
        var scan = new double[n];
        var span = cavity.SpanFsr * inst.FsrHz;
        var ratio = 1.0;
        if (calibration && spec.CalibrationWavelengthM is double lc && spec.SourceWavelengthM is double ls) ratio = ls / lc;
        for (var i = 0; i < n; i++)
        {
            t[i] = i * spec.SampleIntervalS;
            double v;
            bool down;
            if (spec.Triangle)
            {
                var half = n / 2.0;
                down = i >= half;
                v = down ? 1 - (i - half) / half : i / half;
            }
            else
            {
                v = i / (double)(n - 1);
                down = false;
            }

            ramp[i] = v * RampMaxV;
            var f = span * (v + cavity.Quadratic * (v * v - v) + cavity.Cubic * (v * v * v - v));
            if (down) f += cavity.Hysteresis * span * v * (1 - v);
            // a calibration laser at another wavelength sees the same mirror travel as (λs/λc) times the source's comb shift
            scan[i] = f * ratio;
        }

        var offset = rng.NextDouble() * inst.FsrHz;
        var lines = calibration ? [new SimulatedLine(0, 1.0)] : spec.Lines;
        if (spec.RingDown && lines.Any(l => l.WidthHz > 0))
            throw new ArgumentException("ring-down simulation takes lines without intrinsic width only", nameof(spec));
        var clean = new double[n];
        foreach (var line in lines)
        {
            // TEM00 (height 1) and each transverse family, whose resonances sit OffsetFsr of an FSR higher
            AddResponse(clean, spec, inst, line, line.FrequencyHz - offset, 1.0, scan);
            foreach (var family in cavity.Families)
                AddResponse(clean, spec, inst, line, line.FrequencyHz - offset - family.OffsetFsr * inst.FsrHz, family.RelativeHeight, scan);
        }

        var peak = clean.Max();
        var sigma = spec.NoiseFraction * peak * cavity.Gain;
        var lo = cavity.DetectorOffset - 0.08 * peak * cavity.Gain;
        var hi = cavity.DetectorOffset + (spec.FullScale ?? 1.15) * peak * cavity.Gain;
        var lsb = spec.Bits > 0 ? (hi - lo) / ((1 << spec.Bits) - 1) : 0;
        var signal = new double[n];
        for (var i = 0; i < n; i++)
        {
            var y = cavity.DetectorOffset + cavity.Gain * clean[i] + sigma * Gaussian(rng);
            if (lsb > 0) y = lo + Math.Clamp(Math.Round((y - lo) / lsb), 0, (1 << spec.Bits) - 1) * lsb;
            else if (spec.FullScale is not null) y = Math.Clamp(y, lo, hi);
            signal[i] = y;
        }

        for (var i = 0; i < n; i++) ramp[i] += 0.002 * Gaussian(rng); // ramp monitor noise, V
        return new SimulatedTrace(t, ramp, signal, scan, offset);
    }

    /// <summary>
    /// Adds one line's transmission through one mode family to <paramref name="clean"/>: <paramref name="height"/> ×
    /// intensity × the response at detuning <paramref name="frequencyHz"/> − scan. Static: the Airy function, or for a
    /// line of intrinsic Lorentzian width W the Airy function convolved with that Lorentzian (exact: the Airy function is
    /// (1−R)/(1+R) times a Poisson kernel Σ R^|k| e^{ikφ}, and the convolution multiplies harmonic k by e^{−π W |k| / FSR},
    /// i.e. replaces R by R·e^{−π W / FSR} in the kernel; the area over one FSR is unchanged). Dynamic
    /// (<see cref="SimulationSpec.RingDown"/>): the swept-cavity field equation, see <see cref="RingDownResponse"/>.
    /// </summary>
    private static void AddResponse(double[] clean, SimulationSpec spec, Instrument inst, SimulatedLine line, double frequencyHz, double height, double[] scan)
    {
        var n = clean.Length;
        var weight = line.Intensity * height;
        if (spec.RingDown)
        {
            var response = RingDownResponse(frequencyHz, scan, spec.SampleIntervalS, inst);
            for (var i = 0; i < n; i++) clean[i] += weight * response[i];
            return;
        }

        for (var i = 0; i < n; i++)
            clean[i] += weight * StaticResponse(frequencyHz - scan[i], inst, line.WidthHz);
    }

    /// <summary>
    /// Static transmission at detuning <paramref name="detuningHz"/> of a line of intrinsic Lorentzian FWHM
    /// <paramref name="widthHz"/>: the Airy function (peak 1) convolved with that Lorentzian (area-normalised), exactly:
    /// (1−R)/(1+R) · (1−R′²)/(1 − 2R′cos φ + R′²) with φ = 2π·detuning/FSR and R′ = R·e^{−π·width/FSR}.
    /// </summary>
    public static double StaticResponse(double detuningHz, Instrument inst, double widthHz)
    {
        if (!(widthHz > 0)) return Airy.Transmission(detuningHz, inst.FsrHz, inst.Finesse);
        var r = ReflectanceOfFinesse(inst.Finesse);
        var rw = r * Math.Exp(-Math.PI * widthHz / inst.FsrHz);
        var phi = 2 * Math.PI * detuningHz / inst.FsrHz;
        return (1 - r) / (1 + r) * (1 - rw * rw) / (1 - 2 * rw * Math.Cos(phi) + rw * rw);
    }

    /// <summary>The mirror reflectance R whose finesse π√R/(1−R) is <paramref name="finesse"/> (root of F·s² + π·s − F = 0, s = √R).</summary>
    public static double ReflectanceOfFinesse(double finesse)
    {
        var f = Math.Max(1, finesse);
        var sqrtR = (-Math.PI + Math.Sqrt(Math.PI * Math.PI + 4 * f * f)) / (2 * f);
        return sqrtR * sqrtR;
    }

    /// <summary>
    /// |a|² of the swept-cavity field equation da/dt = (−1/τ + i·2π·Δ(t))·a + 1/τ on the sample grid, Δ(t) the detuning
    /// of a line at <paramref name="frequencyHz"/> from the nearest resonance (wrapped to ±FSR/2: the field of the
    /// previous order has long decayed half an FSR away unless the sweep is absurdly fast), τ = 1/(π·linewidth). Each
    /// sample interval is cut into sub-steps short enough that Δ moves by less than 1/(20τ) and the phase by less than
    /// 0.2 rad per sub-step (at most 256 of them); over a sub-step Δ is held at its midpoint value and the equation is
    /// solved exactly, a ← a·e^{λh} + (e^{λh} − 1)/(λτ) with λ = −1/τ + i·2πΔ. It starts from the steady state of the
    /// first sample. In the slow limit |a|² = 1/(1 + (2Δ/linewidth)²): the Lorentzian of the cavity linewidth.
    /// </summary>
    public static double[] RingDownResponse(double frequencyHz, double[] scan, double intervalS, Instrument inst)
    {
        var n = scan.Length;
        var tau = 1 / (Math.PI * inst.LinewidthHz);
        var fsr = inst.FsrHz;
        double Detuning(double f) => f - fsr * Math.Round(f / fsr);
        var result = new double[n];
        var d0 = Detuning(frequencyHz - scan[0]);
        var a = 1 / (1 - new System.Numerics.Complex(0, 2 * Math.PI * d0 * tau));
        result[0] = a.Real * a.Real + a.Imaginary * a.Imaginary;
        for (var i = 1; i < n; i++)
        {
            var start = frequencyHz - scan[i - 1];
            var end = frequencyHz - scan[i];
            var change = Math.Abs(end - start);
            var worst = Math.Max(Math.Abs(Detuning(start)), Math.Abs(Detuning(end)));
            var steps = (int)Math.Clamp(Math.Ceiling(Math.Max(change * 20 * tau, 2 * Math.PI * worst * intervalS / 0.2)), 1, 256);
            var h = intervalS / steps;
            for (var k = 0; k < steps; k++)
            {
                var delta = Detuning(start + (end - start) * (k + 0.5) / steps);
                var lambda = new System.Numerics.Complex(-1 / tau, 2 * Math.PI * delta);
                var e = System.Numerics.Complex.Exp(lambda * h);
                a = a * e + (e - 1) / (lambda * tau);
            }

            result[i] = a.Real * a.Real + a.Imaginary * a.Imaginary;
        }

        return result;
    }

    /// <summary>Standard normal deviate (Box–Muller).</summary>
    public static double Gaussian(Random rng)
    {
        var u1 = 1.0 - rng.NextDouble();
        var u2 = rng.NextDouble();
        return Math.Sqrt(-2 * Math.Log(u1)) * Math.Cos(2 * Math.PI * u2);
    }
}

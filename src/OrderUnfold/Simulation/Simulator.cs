using System.Globalization;
using System.Text;
using OrderUnfold.Instruments;
using OrderUnfold.Io;

namespace OrderUnfold.Simulation;

/// <summary>A line of a simulated source.</summary>
/// <param name="FrequencyHz">Frequency relative to an arbitrary origin, Hz.</param>
/// <param name="Intensity">Relative intensity.</param>
/// <param name="WidthHz">Intrinsic Lorentzian FWHM, Hz (0 for a narrow line).</param>
public sealed record SimulatedLine(double FrequencyHz, double Intensity, double WidthHz = 0);

/// <summary>How one cavity is swept in the simulation.</summary>
public sealed record SimulatedCavity
{
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
}

/// <summary>What to simulate.</summary>
public sealed record SimulationSpec
{
    public required IReadOnlyList<SimulatedLine> Lines { get; init; }
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
}

/// <summary>One simulated record: time, ramp voltage, detector signal, and the true scan shift for tests.</summary>
public sealed record SimulatedTrace(double[] TimeS, double[] RampV, double[] Signal, double[] TrueScanHz, double OffsetHz);

/// <summary>What <see cref="Simulator.Write"/> produced.</summary>
public sealed record SimulationOutput(Setup Setup, IReadOnlyList<string> Files, string SetupPath);

/// <summary>
/// Synthetic scanning-cavity records: Airy transmission of a line source through each cavity while a
/// non-linear, hysteretic piezo ramps the spacing, with detector offset, Gaussian noise and digitiser
/// quantisation. Used by the tests, the demo and anyone who wants to see a planned measurement.
/// </summary>
public static class Simulator
{
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
        var clean = new double[n];
        foreach (var line in lines)
        {
            var gamma = inst.LinewidthHz;
            var finesse = line.WidthHz > 0 ? inst.FsrHz / (gamma + line.WidthHz) : inst.Finesse;
            var area = line.WidthHz > 0 ? gamma / (gamma + line.WidthHz) : 1.0;
            for (var i = 0; i < n; i++)
                clean[i] += line.Intensity * area * Airy.Transmission(line.FrequencyHz - offset - scan[i], inst.FsrHz, Math.Max(1, finesse));
        }

        var peak = clean.Max();
        var sigma = spec.NoiseFraction * peak * cavity.Gain;
        var lo = cavity.DetectorOffset - 0.08 * peak * cavity.Gain;
        var hi = cavity.DetectorOffset + 1.15 * peak * cavity.Gain;
        var lsb = spec.Bits > 0 ? (hi - lo) / ((1 << spec.Bits) - 1) : 0;
        var signal = new double[n];
        for (var i = 0; i < n; i++)
        {
            var y = cavity.DetectorOffset + cavity.Gain * clean[i] + sigma * Gaussian(rng);
            if (lsb > 0) y = lo + Math.Clamp(Math.Round((y - lo) / lsb), 0, (1 << spec.Bits) - 1) * lsb;
            signal[i] = y;
        }

        for (var i = 0; i < n; i++) ramp[i] += 0.002 * Gaussian(rng); // ramp monitor noise, V
        return new SimulatedTrace(t, ramp, signal, scan, offset);
    }

    /// <summary>Writes each cavity's source record (and calibration record) as CSV plus a setup file.</summary>
    public static SimulationOutput Write(SimulationSpec spec, string directory, SolveOptions? solve = null)
    {
        Directory.CreateDirectory(directory);
        var rng = new Random(spec.Seed);
        var files = new List<string>();
        var instruments = new List<InstrumentSpec>();
        var sweeps = new List<SweepSpec>();
        var cals = new List<CalibrationSpec>();
        foreach (var cav in spec.Cavities)
        {
            var inst = cav.Instrument;
            instruments.Add(new InstrumentSpec
            {
                Name = inst.Name, Geometry = inst.Geometry, LengthM = inst.LengthM, FsrHz = inst.LengthM is null ? inst.FsrHz : null,
                RefractiveIndex = inst.RefractiveIndex, Finesse = inst.Finesse,
            });
            var src = Trace(spec, cav, false, rng);
            var srcPath = Path.Combine(directory, $"{inst.Name}_source.csv");
            WriteCsv(srcPath, spec, cav, src, "source");
            files.Add(srcPath);
            sweeps.Add(new SweepSpec { Instrument = inst.Name, File = Options(srcPath, spec) });
            if (spec.CalibrationSweeps)
            {
                var cal = Trace(spec, cav, true, rng);
                var calPath = Path.Combine(directory, $"{inst.Name}_calibration.csv");
                WriteCsv(calPath, spec, cav, cal, "calibration laser");
                files.Add(calPath);
                cals.Add(new CalibrationSpec { Instrument = inst.Name, File = Options(calPath, spec), WavelengthM = spec.CalibrationWavelengthM });
            }
        }

        var setupPath = Path.Combine(directory, "setup.toml");
        var setup = new Setup
        {
            Path = setupPath,
            Instruments = instruments,
            Sweeps = sweeps,
            Calibrations = cals,
            Solve = (solve ?? new SolveOptions()) with { SourceWavelengthM = spec.SourceWavelengthM ?? solve?.SourceWavelengthM },
        };
        AtomicFile.WriteAllText(setupPath, "# " + spec.Label + "\n" + SetupWriter.Write(setup, directory));
        files.Add(setupPath);
        return new SimulationOutput(setup, files, setupPath);
    }

    private static SweepFileOptions Options(string path, SimulationSpec spec) => new()
    {
        Path = Path.GetFullPath(path),
        XColumn = "time_s",
        YColumn = "signal_V",
        RampColumn = spec.Triangle ? "ramp_V" : null,
        Scan = ScanCoordinate.Time,
    };

    private static void WriteCsv(string path, SimulationSpec spec, SimulatedCavity cav, SimulatedTrace trace, string what)
    {
        var sb = new StringBuilder();
        var c = CultureInfo.InvariantCulture;
        sb.AppendLine($"# {spec.Label}");
        sb.AppendLine($"# cavity {cav.Instrument.Name}: {what}; seed {spec.Seed}");
        sb.AppendLine($"Record length,{trace.Signal.Length}");
        sb.AppendLine($"Sample interval,{spec.SampleIntervalS.ToString("R", c)}");
        sb.AppendLine("time_s,ramp_V,signal_V");
        for (var i = 0; i < trace.Signal.Length; i++)
            sb.Append(trace.TimeS[i].ToString("G9", c)).Append(',')
              .Append(trace.RampV[i].ToString("F4", c)).Append(',')
              .Append(trace.Signal[i].ToString("G6", c)).Append('\n');
        AtomicFile.WriteAllText(path, sb.ToString());
    }

    /// <summary>Standard normal deviate (Box–Muller).</summary>
    public static double Gaussian(Random rng)
    {
        var u1 = 1.0 - rng.NextDouble();
        var u2 = rng.NextDouble();
        return Math.Sqrt(-2 * Math.Log(u1)) * Math.Cos(2 * Math.PI * u2);
    }
}

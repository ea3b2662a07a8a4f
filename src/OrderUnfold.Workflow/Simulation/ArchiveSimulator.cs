using System.Globalization;
using System.Text;
using OrderUnfold.Instruments;
using OrderUnfold.Io;

namespace OrderUnfold.Simulation;

/// <summary>What is wrong with one simulated archive item (most items have nothing wrong).</summary>
public enum ArchiveDefect
{
    /// <summary>A good sweep.</summary>
    None,

    /// <summary>The file exists but is empty (a capture that was never written).</summary>
    EmptyFile,

    /// <summary>The file stops after its preamble and header: no samples.</summary>
    HeaderOnly,

    /// <summary>The file holds binary noise instead of text (a damaged disk block).</summary>
    Garbage,

    /// <summary>The manifest names the file but it was never written.</summary>
    MissingFile,

    /// <summary>The laser was off: the detector records only its offset and noise.</summary>
    LaserOff,

    /// <summary>The file is good but the manifest row carries an unreadable timestamp.</summary>
    BadTimestamp,
}

/// <summary>
/// A simulated monitoring archive: one laser watched through one scanning cavity every
/// <see cref="IntervalS"/> seconds. The laser runs on one longitudinal mode with weaker neighbours
/// <see cref="ArchiveLaser.ModeSpacingHz"/> apart, drifts slowly, and at item <see cref="ArchiveLaser.HopAt"/> hops to the next mode
/// up; as the hop approaches, the upper neighbour grows (the side-mode suppression falls) and after the hop
/// the old mode fades. Everything is invented (simulated data) and fixed by <see cref="Seed"/>.
/// </summary>
public sealed record ArchiveSpec
{
    /// <summary>Number of items (sweeps).</summary>
    public int Items { get; init; } = 300;

    /// <summary>Time between items, s.</summary>
    public double IntervalS { get; init; } = 5;

    /// <summary>Time stamp of the first item.</summary>
    public DateTimeOffset Start { get; init; } = new(2025, 3, 14, 9, 0, 0, TimeSpan.Zero);

    /// <summary>The scanning cavity.</summary>
    public Instrument Cavity { get; init; } = Instrument.FromLength("monitor", 0.1000, CavityGeometry.Planar, 100);

    /// <summary>Samples per sweep (one up ramp).</summary>
    public int Samples { get; init; } = 2500;

    /// <summary>Sweep span in FSRs (the calibration laser must give at least three peaks across it).</summary>
    public double SpanFsr { get; init; } = 3.6;

    /// <summary>Duration of one ramp, s (the time column runs from 0 to this).</summary>
    public double RampDurationS { get; init; } = 5e-3;

    /// <summary>Position of the calibration laser on the scan axis, as a fraction of the FSR.</summary>
    public double CalibrationPositionFsr { get; init; } = 0.2;

    /// <summary>Quadratic and cubic piezo non-linearity (as in <see cref="SimulatedCavity"/>).</summary>
    public double Quadratic { get; init; } = 0.04;

    /// <inheritdoc cref="Quadratic"/>
    public double Cubic { get; init; }

    /// <summary>The monitored laser: its modes, drift and mode hop.</summary>
    public ArchiveLaser Laser { get; init; } = new();

    /// <summary>Gaussian noise σ as a fraction of the strongest mode's peak signal.</summary>
    public double NoiseFraction { get; init; } = 0.003;

    /// <summary>Digitiser resolution, bits.</summary>
    public int Bits { get; init; } = 10;

    /// <summary>Samples in the calibration-laser sweep.</summary>
    public int CalibrationSamples { get; init; } = 6000;

    /// <summary>Items with a defect, by 0-based index.</summary>
    public IReadOnlyDictionary<int, ArchiveDefect> Defects { get; init; } = new Dictionary<int, ArchiveDefect>
    {
        [36] = ArchiveDefect.EmptyFile,
        [87] = ArchiveDefect.HeaderOnly,
        [141] = ArchiveDefect.Garbage,
        [202] = ArchiveDefect.MissingFile,
        [250] = ArchiveDefect.LaserOff,
        [265] = ArchiveDefect.BadTimestamp,
    };

    public int Seed { get; init; } = 20250314;

    public string Label { get; init; } = "SIMULATED DATA: OrderUnfold demo archive (laser monitored through one scanning cavity, invented scenario)";
}

/// <summary>
/// The laser of a simulated archive (<see cref="ArchiveSpec"/>): where its lasing mode starts on the cavity's scan axis,
/// how it drifts and jitters from item to item, and the mode hop with the side-mode suppression around it.
/// </summary>
public sealed record ArchiveLaser
{
    /// <summary>Spacing of the laser's longitudinal modes, Hz.</summary>
    public double ModeSpacingHz { get; init; } = 410e6;

    /// <summary>Position of the lasing mode on the cavity's scan axis at the first item, Hz (within one FSR).</summary>
    public double StartPositionHz { get; init; } = 0.45e9;

    /// <summary>Slow linear drift of the laser, Hz/s.</summary>
    public double DriftHzPerS { get; init; } = 20e3;

    /// <summary>Random-walk step of the laser frequency per item (σ), Hz.</summary>
    public double JitterHz { get; init; } = 0.3e6;

    /// <summary>Index (0-based) of the first item after the mode hop; negative: no hop.</summary>
    public int HopAt { get; init; } = 180;

    /// <summary>Side-mode suppression far from the hop, dB.</summary>
    public double QuietSmsrDb { get; init; } = 20;

    /// <summary>Side-mode suppression of the growing neighbour just before the hop, dB.</summary>
    public double NearHopSmsrDb { get; init; } = 4;

    /// <summary>Items over which the neighbour grows before the hop (and the old mode fades after it).</summary>
    public int HopRampItems { get; init; } = 40;
}

/// <summary>One simulated item and what was simulated for it.</summary>
/// <param name="Id">Item id (e.g. <c>sweep-0001</c>).</param>
/// <param name="File">Path of its sweep file (absent when the defect is <see cref="ArchiveDefect.MissingFile"/>).</param>
/// <param name="Timestamp">Manifest time stamp text (unreadable for <see cref="ArchiveDefect.BadTimestamp"/>).</param>
/// <param name="TimeS">Seconds since the first item.</param>
/// <param name="LasingPositionHz">True position of the lasing (strongest) mode on the cavity scan axis, Hz (unwrapped).</param>
/// <param name="LasingMode">Index of the lasing mode (0 before the hop, 1 after).</param>
/// <param name="SmsrDb">True side-mode suppression (strongest over second strongest mode), dB.</param>
/// <param name="Defect">What is wrong with the item.</param>
public sealed record ArchiveItem(string Id, string File, string Timestamp, double TimeS, double LasingPositionHz, int LasingMode, double SmsrDb, ArchiveDefect Defect);

/// <summary>What <see cref="ArchiveSimulator.Write"/> produced.</summary>
/// <param name="Setup">Setup naming the first good item's sweep as its template and the calibration sweep.</param>
/// <param name="SetupPath">Where the setup was written.</param>
/// <param name="CalibrationSweepPath">The calibration-laser sweep.</param>
/// <param name="TruthPath">truth.csv: the simulated state of every item.</param>
/// <param name="Items">Every item, in time order.</param>
public sealed record ArchiveOutput(Setup Setup, string SetupPath, string CalibrationSweepPath, string TruthPath, IReadOnlyList<ArchiveItem> Items);

/// <summary>Writes a simulated archive of single-cavity sweeps (see <see cref="ArchiveSpec"/>).</summary>
public static class ArchiveSimulator
{
    /// <summary>Folder (inside the archive folder) that holds the item sweeps.</summary>
    public const string SweepFolder = "sweeps";

    /// <summary>Modes simulated relative to the initially lasing one.</summary>
    private static readonly int[] Modes = [-1, 0, 1, 2];

    /// <summary>
    /// Writes <c>sweeps/&lt;id&gt;.csv</c> per item, <c>calibration-laser.csv</c>, <c>setup.toml</c> and
    /// <c>truth.csv</c> into <paramref name="directory"/>. The same spec always writes the same bytes. A cancelled
    /// <paramref name="cancellationToken"/> stops it before the next item (<see cref="OperationCanceledException"/>).
    /// </summary>
    public static ArchiveOutput Write(ArchiveSpec spec, string directory, CancellationToken cancellationToken = default)
    {
        ArgumentNullException.ThrowIfNull(spec);
        if (spec.Items < 1) throw new ArgumentOutOfRangeException(nameof(spec), spec.Items, "an archive needs at least one item");
        var root = Path.GetFullPath(directory);
        var sweepDir = Path.Combine(root, SweepFolder);
        Directory.CreateDirectory(sweepDir);
        var rng = new Random(spec.Seed);
        var inst = spec.Cavity;
        var scan = ScanAxis(spec, spec.Samples);

        // calibration-laser sweep: one line at position 0 (its own comb)
        var calPath = Path.Combine(root, "calibration-laser.csv");
        var calScan = ScanAxis(spec, spec.CalibrationSamples);
        var cal = Signal(spec, calScan, [(spec.CalibrationPositionFsr * inst.FsrHz, 1.0)], rng);
        AtomicFile.WriteAllText(calPath, Csv(spec, "calibration laser", cal));

        var items = new List<ArchiveItem>(spec.Items);
        var position = spec.Laser.StartPositionHz;
        for (var k = 0; k < spec.Items; k++)
        {
            cancellationToken.ThrowIfCancellationRequested();
            var id = $"sweep-{k + 1:D4}";
            var t = k * spec.IntervalS;
            if (k > 0) position += spec.Laser.DriftHzPerS * spec.IntervalS + spec.Laser.JitterHz * Simulator.Gaussian(rng);
            var defect = spec.Defects.TryGetValue(k, out var d) ? d : ArchiveDefect.None;
            var (lasing, intensities) = ModeIntensities(spec, k);
            var modes = Modes.Select((m, i) => (Position: position + m * spec.Laser.ModeSpacingHz, Intensity: intensities[i])).ToArray();
            var sorted = intensities.OrderByDescending(v => v).ToArray();
            var smsr = 10 * Math.Log10(sorted[0] / sorted[1]);
            var lasingPosition = position + lasing * spec.Laser.ModeSpacingHz;
            var file = Path.Combine(sweepDir, id + ".csv");
            var stamp = spec.Start.AddSeconds(t).ToString("yyyy-MM-dd'T'HH:mm:ss'Z'", CultureInfo.InvariantCulture);
            // every item draws the same amount of noise so that a defect does not change the items after it
            var signal = Signal(spec, scan, modes, rng);
            stamp = WriteItem(spec, k, id, file, stamp, defect, signal, scan, modes);
            items.Add(new ArchiveItem(id, file, stamp, t, lasingPosition, lasing, smsr, defect));
        }

        var template = items.First(i => i.Defect == ArchiveDefect.None).File;
        var options = new SweepFileOptions { Path = template, XColumn = "time_s", YColumn = "signal_V", Scan = ScanCoordinate.Time };
        var setup = new Setup
        {
            Path = Path.Combine(root, "setup.toml"),
            Instruments = [new InstrumentSpec { Name = inst.Name, Geometry = inst.Geometry, LengthM = inst.LengthM, FsrHz = inst.LengthM is null ? inst.FsrHz : null, Finesse = inst.Finesse }],
            Sweeps = [new SweepSpec { Instrument = inst.Name, File = options }],
            Calibrations = [new CalibrationSpec { Instrument = inst.Name, File = options with { Path = calPath } }],
        };
        AtomicFile.WriteAllText(setup.Path, "# " + spec.Label + "\n# The [[sweep]] file is a template: the batch manifest replaces it item by item.\n" + SetupWriter.Write(setup, root));

        var truthPath = Path.Combine(root, "truth.csv");
        AtomicFile.WriteAllText(truthPath, TruthCsv(spec, items));
        return new ArchiveOutput(setup, setup.Path, calPath, truthPath, items);
    }

    /// <summary>Writes one item's sweep file, with its defect (an empty, truncated, garbage or missing file, a dark
    /// record, or a time stamp in another format); returns the item's time stamp as the archive lists it.</summary>
    private static string WriteItem(ArchiveSpec spec, int k, string id, string file, string stamp, ArchiveDefect defect, Trace signal,
        double[] scan, (double Position, double Intensity)[] modes)
    {
        switch (defect)
        {
            case ArchiveDefect.EmptyFile:
                AtomicFile.WriteAllText(file, "");
                return stamp;
            case ArchiveDefect.HeaderOnly:
                var full = Csv(spec, id, signal);
                AtomicFile.WriteAllText(file, full[..(full.IndexOf("time_s,signal_V\n", StringComparison.Ordinal) + "time_s,signal_V\n".Length)]);
                return stamp;
            case ArchiveDefect.Garbage:
                var bytes = new byte[40_000];
                new Random(spec.Seed + k).NextBytes(bytes);
                AtomicFile.WriteAllBytes(file, bytes);
                return stamp;
            case ArchiveDefect.MissingFile:
                if (File.Exists(file)) File.Delete(file);
                return stamp;
            case ArchiveDefect.LaserOff:
                var dark = Signal(spec, scan, modes.Select(m => (m.Position, 0.0)).ToArray(), new Random(spec.Seed + k), noiseScale: signal.Scale);
                AtomicFile.WriteAllText(file, Csv(spec, id, dark));
                return stamp;
            case ArchiveDefect.BadTimestamp:
                stamp = "14/03/2025 09:" + (k * spec.IntervalS / 60).ToString("F0", CultureInfo.InvariantCulture) + " h";
                AtomicFile.WriteAllText(file, Csv(spec, id, signal));
                return stamp;
            default:
                AtomicFile.WriteAllText(file, Csv(spec, id, signal));
                return stamp;
        }
    }

    /// <summary>truth.csv: id, time, lasing mode, its true scan position, the true SMSR and the defect of every item.</summary>
    public static string TruthCsv(ArchiveSpec spec, IReadOnlyList<ArchiveItem> items)
    {
        var c = CultureInfo.InvariantCulture;
        var sb = new StringBuilder($"# {spec.Label}\n# mode spacing {spec.Laser.ModeSpacingHz.ToString("R", c)} Hz; drift {spec.Laser.DriftHzPerS.ToString("R", c)} Hz/s\n");
        sb.Append("id,time_s,lasing_mode,lasing_position_hz,smsr_db,defect\n");
        foreach (var i in items)
            sb.Append(i.Id).Append(',').Append(i.TimeS.ToString("R", c)).Append(',').Append(i.LasingMode.ToString(c)).Append(',')
              .Append(i.LasingPositionHz.ToString("R", c)).Append(',').Append(i.SmsrDb.ToString("F3", c)).Append(',')
              .Append(i.Defect.ToString().ToLowerInvariant()).Append('\n');
        return sb.ToString();
    }

    /// <summary>The lasing mode index and the intensity of each of <see cref="Modes"/> at item <paramref name="k"/>.</summary>
    internal static (int Lasing, double[] Intensities) ModeIntensities(ArchiveSpec spec, int k)
    {
        double Level(double db) => Math.Pow(10, -db / 10);
        var quiet = Level(spec.Laser.QuietSmsrDb);
        var far = Level(spec.Laser.QuietSmsrDb + 6);
        var hop = spec.Laser.HopAt >= 0 && k >= spec.Laser.HopAt;
        // 0 far from the hop, 1 right at it (before or after)
        var distance = spec.Laser.HopAt < 0 ? int.MaxValue : hop ? k - spec.Laser.HopAt : spec.Laser.HopAt - 1 - k;
        var closeness = Math.Clamp(1 - distance / (double)Math.Max(1, spec.Laser.HopRampItems), 0, 1);
        var neighbourDb = spec.Laser.QuietSmsrDb + (spec.Laser.NearHopSmsrDb - spec.Laser.QuietSmsrDb) * closeness * closeness;
        return hop
            // modes −1, 0 (old, fading), 1 (lasing), 2
            ? (1, [far * 0.5, Level(neighbourDb), 1.0, quiet * 0.8])
            // modes −1, 0 (lasing), 1 (growing), 2
            : (0, [quiet, 1.0, Level(neighbourDb), far * 0.5]);
    }

    private static double[] ScanAxis(ArchiveSpec spec, int n)
    {
        var span = spec.SpanFsr * spec.Cavity.FsrHz;
        var scan = new double[n];
        for (var i = 0; i < n; i++)
        {
            var v = i / (double)(n - 1);
            scan[i] = span * (v + spec.Quadratic * (v * v - v) + spec.Cubic * (v * v * v - v));
        }

        return scan;
    }

    private sealed record Trace(double[] Signal, double Scale);

    private static Trace Signal(ArchiveSpec spec, double[] scan, (double Position, double Intensity)[] lines, Random rng, double? noiseScale = null)
    {
        var inst = spec.Cavity;
        var n = scan.Length;
        var clean = new double[n];
        foreach (var (pos, intensity) in lines)
        {
            if (intensity <= 0) continue;
            for (var i = 0; i < n; i++) clean[i] += intensity * Airy.Transmission(pos - scan[i], inst.FsrHz, inst.Finesse);
        }

        var peak = noiseScale ?? Math.Max(clean.Max(), 1e-12);
        const double offset = 0.015;
        var sigma = spec.NoiseFraction * peak;
        var lo = offset - 0.05 * peak;
        var hi = offset + 1.2 * peak;
        var top = (1 << spec.Bits) - 1;
        var lsb = spec.Bits > 0 ? (hi - lo) / top : 0;
        var y = new double[n];
        for (var i = 0; i < n; i++)
        {
            var v = offset + clean[i] + sigma * Simulator.Gaussian(rng);
            if (lsb > 0) v = lo + Math.Clamp(Math.Round((v - lo) / lsb), 0, top) * lsb;
            y[i] = v;
        }

        return new Trace(y, peak);
    }

    private static string Csv(ArchiveSpec spec, string what, Trace trace)
    {
        var c = CultureInfo.InvariantCulture;
        var sb = new StringBuilder(trace.Signal.Length * 24 + 200);
        sb.Append("# ").Append(spec.Label).Append('\n');
        sb.Append("# ").Append(what).Append("; seed ").Append(spec.Seed.ToString(c)).Append('\n');
        sb.Append("Record length,").Append(trace.Signal.Length.ToString(c)).Append('\n');
        sb.Append("time_s,signal_V\n");
        for (var i = 0; i < trace.Signal.Length; i++)
            sb.Append((spec.RampDurationS * i / (trace.Signal.Length - 1)).ToString("G9", c)).Append(',').Append(trace.Signal[i].ToString("G6", c)).Append('\n');
        return sb.ToString();
    }
}

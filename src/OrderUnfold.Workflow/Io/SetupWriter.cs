using System.Globalization;
using System.Text;
using OrderUnfold.Instruments;

namespace OrderUnfold.Io;

/// <summary>
/// Writes a <see cref="Setup"/> as setup-file TOML that <see cref="SetupReader.Read"/> reads back to the same
/// values (quantities to 12 significant digits, far inside 1e-9 relative).
/// </summary>
public static class SetupWriter
{
    private static readonly (string Unit, double Factor)[] FrequencyUnits = [("Hz", 1), ("kHz", 1e3), ("MHz", 1e6), ("GHz", 1e9), ("THz", 1e12)];
    private static readonly (string Unit, double Factor)[] LengthUnits = [("pm", 1e-12), ("nm", 1e-9), ("um", 1e-6), ("mm", 1e-3), ("m", 1)];
    private static readonly (string Unit, double Factor)[] TimeUnits = [("ps", 1e-12), ("ns", 1e-9), ("us", 1e-6), ("ms", 1e-3), ("s", 1)];

    /// <summary>
    /// The setup as TOML text. Data file paths below <paramref name="setupDirectory"/> are written relative to
    /// it (with '/' separators); others stay absolute. Values the reader would refuse (such as an instrument
    /// with neither length nor FSR) raise <see cref="ArgumentException"/>: they are programming errors here.
    /// </summary>
    public static string Write(Setup setup, string setupDirectory)
    {
        ArgumentNullException.ThrowIfNull(setup);
        ArgumentException.ThrowIfNullOrWhiteSpace(setupDirectory);
        var dir = Path.GetFullPath(setupDirectory);
        var w = new StringBuilder();
        w.Append("# OrderUnfold setup (TOML); docs/setup.md describes every key.\n");

        foreach (var i in setup.Instruments) WriteInstrument(w, i);
        foreach (var s in setup.Sweeps)
        {
            w.Append("\n[[sweep]]\n");
            Key(w, "instrument", Str(s.Instrument));
            WriteFileOptions(w, s.File, dir);
        }

        foreach (var c in setup.Calibrations)
        {
            w.Append("\n[[calibration]]\n");
            Key(w, "instrument", Str(c.Instrument));
            WriteFileOptions(w, c.File, dir);
            if (c.WavelengthM is double wl) Key(w, "wavelength", Quantity(wl, LengthUnits, "wavelength"));
            if (c.AxisDegree is int degree) Key(w, "axis_degree", degree.ToString(CultureInfo.InvariantCulture));
        }

        WriteSolve(w, setup.Solve);
        return w.ToString();
    }

    /// <summary>Writes the setup to <paramref name="path"/> atomically, with data paths relative to its folder.</summary>
    public static void Save(Setup setup, string path)
    {
        var full = Path.GetFullPath(path);
        AtomicFile.WriteAllText(full, Write(setup, Path.GetDirectoryName(full)!));
    }

    private static void WriteInstrument(StringBuilder w, InstrumentSpec i)
    {
        w.Append("\n[[instrument]]\n");
        Key(w, "name", Str(i.Name));
        Key(w, "geometry", Str(CavityGeometryNames.NameOf(i.Geometry)));
        if (i.FsrHz is double fsr)
        {
            // The FSR is what the analysis uses, so it wins when both are known; the spacing stays as a note.
            Key(w, "fsr", Quantity(fsr, FrequencyUnits, "fsr"));
            if (i.LengthM is double note) w.Append("# mirror spacing ").Append(Quantity(note, LengthUnits, "length").Trim('"')).Append('\n');
        }
        else if (i.LengthM is double length)
        {
            Key(w, "length", Quantity(length, LengthUnits, "length"));
        }
        else
        {
            throw new ArgumentException($"instrument '{i.Name}' has neither a length nor an FSR", nameof(i));
        }

        Key(w, "refractive_index", Number(i.RefractiveIndex, "refractive_index"));
        if (i.Finesse is double finesse)
        {
            Key(w, "finesse", Number(finesse, "finesse"));
            if (i.Reflectance is double note) w.Append("# mirror reflectance ").Append(Number(note, "reflectance")).Append('\n');
        }
        else if (i.Reflectance is double r)
        {
            Key(w, "reflectance", Number(r, "reflectance"));
        }
        else
        {
            throw new ArgumentException($"instrument '{i.Name}' has neither a finesse nor a reflectance", nameof(i));
        }

        Key(w, "mirror_loss", Number(i.MirrorLoss, "mirror_loss"));
        Key(w, "fix_finesse", i.FixFinesse ? "true" : "false");
        if (i.MirrorRadiusM is double r1) Key(w, "mirror_radius", Quantity(r1, LengthUnits, "mirror_radius"));
        if (i.MirrorRadius2M is double r2) Key(w, "mirror_radius_2", Quantity(r2, LengthUnits, "mirror_radius_2"));
    }

    private static void WriteFileOptions(StringBuilder w, SweepFileOptions o, string dir)
    {
        Key(w, "file", Str(RelativeIfBelow(o.Path, dir)));
        if (o.XColumn is not null) Key(w, "x_column", Str(o.XColumn));
        if (o.YColumn is not null) Key(w, "y_column", Str(o.YColumn));
        if (o.RampColumn is not null) Key(w, "ramp_column", Str(o.RampColumn));
        if (o.RampFile is not null) Key(w, "ramp_file", Str(RelativeIfBelow(o.RampFile, dir)));
        if (o.RampTimeColumn is not null) Key(w, "ramp_time_column", Str(o.RampTimeColumn));
        if (o.RampValueColumn is not null) Key(w, "ramp_value_column", Str(o.RampValueColumn));
        Key(w, "scan", Str(o.Scan == ScanCoordinate.Ramp ? "ramp" : "time"));
        if (o.SampleIntervalS is double dt) Key(w, "sample_interval", Quantity(dt, TimeUnits, "sample_interval"));
        if (o.Delimiter is char d)
        {
            var text = d switch
            {
                ',' => ",",
                ';' => ";",
                '\t' => "tab",
                _ => throw new ArgumentException($"delimiter '{d}' cannot be written; the setup file accepts ',', ';' and tab", nameof(o)),
            };
            Key(w, "delimiter", Str(text));
        }

        if (o.DecimalComma is bool comma) Key(w, "decimal", Str(comma ? "comma" : "point"));
        if (o.HasHeader is bool header) Key(w, "header", header ? "true" : "false");
        Key(w, "directions", Str(o.Directions switch
        {
            DirectionChoice.Up => "up",
            DirectionChoice.Down => "down",
            _ => "both",
        }));
    }

    private static void WriteSolve(StringBuilder w, SolveOptions s)
    {
        w.Append("\n[solve]\n");
        if (s.WindowStartHz is double a && s.WindowEndHz is double b)
            Key(w, "window", $"[{Quantity(a, FrequencyUnits, "window")}, {Quantity(b, FrequencyUnits, "window")}]");
        else if (s.WindowStartHz is not null || s.WindowEndHz is not null)
            throw new ArgumentException("the solve window needs both ends or neither", nameof(s));
        if (s.GridStepHz is double step) Key(w, "grid_step", Quantity(step, FrequencyUnits, "grid_step"));
        Key(w, "sparsity", Number(s.Sparsity, "sparsity"));
        Key(w, "smoothness", Number(s.Smoothness, "smoothness"));
        if (s.AnchorFrequencyHz is double anchor) Key(w, "anchor_frequency", Quantity(anchor, FrequencyUnits, "anchor_frequency"));
        Key(w, "min_snr", Number(s.MinSnr, "min_snr"));
        if (s.SourceWavelengthM is double wl) Key(w, "source_wavelength", Quantity(wl, LengthUnits, "source_wavelength"));
        Key(w, "refine", s.Refine ? "true" : "false");
        Key(w, "fit_widths", s.FitWidths ? "true" : "false");
        Key(w, "bootstrap", s.Bootstrap.ToString(System.Globalization.CultureInfo.InvariantCulture));
        Key(w, "doubtful_delta_chi2", Number(s.DoubtfulDeltaChiSquare, "doubtful_delta_chi2"));
        Key(w, "self_calibrate", Str(s.SelfCalibrate switch
        {
            SelfCalibrationMode.Always => "always",
            SelfCalibrationMode.Never => "never",
            _ => "auto",
        }));
        if (s.KnownIntervalHz is double interval) Key(w, "known_interval", Quantity(interval, FrequencyUnits, "known_interval"));
        Key(w, "refine_fsr", s.RefineFsr ? "true" : "false");
        // written only when not the default, so that existing setups (the demo's) stay byte-identical
        if (s.MaxMemoryGb != 4.0) Key(w, "max_memory_gb", Number(s.MaxMemoryGb, "max_memory_gb"));
        if (s.Solver != SolverChoice.Auto) Key(w, "solver", Str(s.Solver == SolverChoice.Dense ? "dense" : "active-set"));
    }

    private static void Key(StringBuilder w, string key, string value) => w.Append(key).Append(" = ").Append(value).Append('\n');

    /// <summary>A path relative to <paramref name="dir"/> when the file lies inside it, else the absolute path.</summary>
    internal static string RelativeIfBelow(string path, string dir)
    {
        var full = Path.GetFullPath(path);
        var relative = Path.GetRelativePath(dir, full);
        var outside = Path.IsPathRooted(relative) || relative == ".." ||
                      relative.StartsWith(".." + Path.DirectorySeparatorChar, StringComparison.Ordinal) ||
                      relative.StartsWith("../", StringComparison.Ordinal);
        return outside ? full : relative.Replace(Path.DirectorySeparatorChar, '/');
    }

    /// <summary>A quantity as a quoted string with the unit that puts the number between 1 and 1000.</summary>
    internal static string Quantity(double si, (string Unit, double Factor)[] units, string what)
    {
        if (!double.IsFinite(si)) throw new ArgumentException($"{what} must be finite to be written but is {si}", what);
        if (si == 0) return Str("0 " + units.First(u => u.Factor == 1).Unit);
        var chosen = units[0];
        foreach (var u in units)
            if (Math.Abs(si) >= u.Factor) chosen = u;
        var scaled = si / chosen.Factor;
        return Str(scaled.ToString("G12", CultureInfo.InvariantCulture) + " " + chosen.Unit);
    }

    /// <summary>A plain TOML number that reads back to the same double.</summary>
    internal static string Number(double v, string what)
    {
        if (!double.IsFinite(v)) throw new ArgumentException($"{what} must be finite to be written but is {v}", what);
        return v.ToString("R", CultureInfo.InvariantCulture);
    }

    /// <summary>A TOML basic string with the characters that need it escaped.</summary>
    internal static string Str(string s)
    {
        var b = new StringBuilder(s.Length + 2).Append('"');
        foreach (var c in s)
        {
            switch (c)
            {
                case '"': b.Append("\\\""); break;
                case '\\': b.Append("\\\\"); break;
                case '\n': b.Append("\\n"); break;
                case '\r': b.Append("\\r"); break;
                case '\t': b.Append("\\t"); break;
                case '\b': b.Append("\\b"); break;
                case '\f': b.Append("\\f"); break;
                default:
                    if (char.IsControl(c)) b.Append("\\u").Append(((int)c).ToString("X4", CultureInfo.InvariantCulture));
                    else b.Append(c);
                    break;
            }
        }

        return b.Append('"').ToString();
    }
}

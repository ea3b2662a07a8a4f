using OrderUnfold.Instruments;
using OrderUnfold.Inversion;
using OrderUnfold.Units;
using Tomlyn.Parsing;
using Tomlyn.Syntax;

namespace OrderUnfold.Io;

/// <summary>Reads and validates a TOML setup file; writes the commented template.</summary>
/// <remarks>
/// The file is parsed into Tomlyn's syntax tree (not a model of plain values) so that every complaint can
/// name the line and column of the key or value at fault. The accepted tables and keys are listed in
/// <see cref="SetupSchema"/>; docs/setup.md describes each one.
/// </remarks>
public static class SetupReader
{
    private static readonly Dictionary<string, ScanCoordinate> Scans = new(StringComparer.OrdinalIgnoreCase)
    {
        ["time"] = ScanCoordinate.Time,
        ["ramp"] = ScanCoordinate.Ramp,
    };

    private static readonly Dictionary<string, char?> Delimiters = new(StringComparer.Ordinal)
    {
        ["auto"] = null,
        [","] = ',',
        [";"] = ';',
        ["tab"] = '\t',
    };

    private static readonly Dictionary<string, bool?> Decimals = new(StringComparer.OrdinalIgnoreCase)
    {
        ["auto"] = null,
        ["point"] = false,
        ["comma"] = true,
    };

    private static readonly Dictionary<string, bool?> Headers = new(StringComparer.OrdinalIgnoreCase)
    {
        ["auto"] = null,
        ["true"] = true,
        ["false"] = false,
    };

    private static readonly Dictionary<string, SolverChoice> SolverChoices = new(StringComparer.OrdinalIgnoreCase)
    {
        ["auto"] = SolverChoice.Auto,
        ["active-set"] = SolverChoice.ActiveSet,
        ["dense"] = SolverChoice.Dense,
    };

    private static readonly Dictionary<string, SelfCalibrationMode> SelfCalibrationModes = new(StringComparer.OrdinalIgnoreCase)
    {
        ["auto"] = SelfCalibrationMode.Auto,
        ["always"] = SelfCalibrationMode.Always,
        ["never"] = SelfCalibrationMode.Never,
    };

    private static readonly Dictionary<string, DirectionChoice> Directions = new(StringComparer.OrdinalIgnoreCase)
    {
        ["both"] = DirectionChoice.Both,
        ["up"] = DirectionChoice.Up,
        ["down"] = DirectionChoice.Down,
    };

    /// <summary>Reads a setup. Throws <see cref="InputException"/> (file, line, column) on any problem.</summary>
    /// <param name="path">The setup file; data files named inside are resolved against its folder.</param>
    public static Setup Read(string path)
    {
        if (string.IsNullOrWhiteSpace(path)) throw new InputException("expected the path of a setup file but got an empty name");
        var full = Path.GetFullPath(path);
        // type, size and line-length limits, checked before and while reading (Io/InputLimits.cs)
        var text = InputLimits.ReadAllText(full, "setup file");

        return ReadText(text, path);
    }

    /// <summary>
    /// Reads setup text as though it were the content of the file at <paramref name="path"/> (which need not
    /// exist): messages name that path, and data files resolve against its folder.
    /// </summary>
    public static Setup ReadText(string toml, string path)
    {
        ArgumentNullException.ThrowIfNull(toml);
        if (string.IsNullOrWhiteSpace(path)) throw new ArgumentException("a setup path is needed to resolve data files", nameof(path));
        return new Parser(path).Parse(toml);
    }

    /// <summary>The commented template that <c>orderunfold init</c> writes.</summary>
    public static string Template() => SetupTemplate.Text;

    /// <summary>One pass over one document.</summary>
    private sealed class Parser(string file)
    {
        private readonly string _directory = Path.GetDirectoryName(Path.GetFullPath(file))!;

        private readonly List<(InstrumentSpec Spec, SetupTomlTable Table)> _instruments = [];
        private readonly List<(SweepSpec Spec, SetupTomlTable Table)> _sweeps = [];
        private readonly List<(CalibrationSpec Spec, SetupTomlTable Table)> _calibrations = [];
        private SolveOptions? _solve;

        public Setup Parse(string toml)
        {
            DocumentSyntax doc;
            try
            {
                doc = SyntaxParser.Parse(toml, file, validate: true);
            }
            catch (Exception e) when (e is not InputException and not OutOfMemoryException)
            {
                // The parser reports problems as diagnostics; this only guards against a surprise inside it.
                throw new InputException($"TOML syntax error: {e.Message}", file, inner: e);
            }

            if (doc.HasErrors)
            {
                // Diagnostics do not come in file order; the earliest one is the cause, later ones often follow from it.
                var first = doc.Diagnostics
                    .Where(d => d.Kind == DiagnosticMessageKind.Error)
                    .OrderBy(d => d.Span.Start.Line).ThenBy(d => d.Span.Start.Column)
                    .First();
                var hint = first.Message.Contains("newline in a string", StringComparison.OrdinalIgnoreCase) ? " (is a closing quote missing?)" : "";
                throw new InputException($"TOML syntax error: {first.Message}{hint}", file, first.Span.Start.Line + 1, first.Span.Start.Column + 1);
            }

            foreach (var kv in doc.KeyValues)
            {
                var key = SetupTomlTable.KeyText(kv.Key);
                var home = SetupSchema.Tables.FirstOrDefault(t => SetupSchema.KeysOf(t.Name).Contains(key));
                var hint = home.Name is null
                    ? "every key belongs under one of " + TableList()
                    : $"did you mean to put it under {SetupSchema.Bracketed(home.Name, home.IsArray)}?";
                throw SetupTomlTable.At(file, kv.Key, $"key '{key}' stands outside any table; {hint}");
            }

            var counts = new Dictionary<string, int>(StringComparer.Ordinal);
            foreach (var t in doc.Tables) ReadTable(t, counts);

            return Finish();
        }

        private static string TableList() =>
            string.Join(", ", SetupSchema.Tables.Select(t => SetupSchema.Bracketed(t.Name, t.IsArray)));

        private void ReadTable(TableSyntaxBase t, Dictionary<string, int> counts)
        {
            var name = SetupTomlTable.KeyText(t.Name);
            var isArray = t is TableArraySyntax;
            var written = SetupSchema.Bracketed(name, isArray);
            var known = SetupSchema.Tables.Where(k => k.Name == name).ToArray();
            if (known.Length == 0)
            {
                var near = SetupSchema.Closest(name, SetupSchema.Tables.Select(k => k.Name));
                var hint = near is null
                    ? $"accepted tables: {TableList()}"
                    : $"did you mean {SetupSchema.Bracketed(near, SetupSchema.Tables.First(k => k.Name == near).IsArray)}? (accepted tables: {TableList()})";
                throw SetupTomlTable.At(file, t, $"unknown table {written}; {hint}");
            }

            if (known[0].IsArray != isArray)
            {
                var proper = SetupSchema.Bracketed(name, known[0].IsArray);
                var why = known[0].IsArray ? "double brackets, since there may be several" : "single brackets, since there is only one";
                throw SetupTomlTable.At(file, t, $"expected {proper} ({why}) but got {written}");
            }

            var index = counts[name] = counts.GetValueOrDefault(name) + 1;
            var table = SetupTomlTable.Create(file, name, isArray, index, t, t.Items, SetupSchema.KeysOf(name));
            switch (name)
            {
                case SetupSchema.InstrumentTable:
                    _instruments.Add((ReadInstrument(table), table));
                    break;
                case SetupSchema.SweepTable:
                    _sweeps.Add((ReadSweep(table), table));
                    break;
                case SetupSchema.CalibrationTable:
                    _calibrations.Add((ReadCalibration(table), table));
                    break;
                default:
                    _solve = ReadSolve(table);
                    break;
            }
        }

        private static InstrumentSpec ReadInstrument(SetupTomlTable t)
        {
            var name = t.RequiredString("name", "a short name that [[sweep]] tables refer to").Trim();
            var geometry = t.Choice("geometry", CavityGeometryNames.ByName, CavityGeometry.Planar);

            // Size: mirror spacing or FSR, exactly one.
            if (t.Has("length") && t.Has("fsr"))
                throw t.AtKey("fsr", $"instrument '{name}' gives both length and fsr; expected exactly one of them (the FSR follows from the length)");
            if (!t.Has("length") && !t.Has("fsr"))
                throw t.AtHeader($"instrument '{name}' needs either length (mirror spacing, e.g. \"50 mm\") or fsr (free spectral range, e.g. \"1.5 GHz\") but has neither");
            var length = t.OptionalQuantity("length", Dimension.Length);
            if (length is <= 0) throw t.AtValue("length", $"length must be positive but got {t.ValueText("length")}");
            var fsr = t.OptionalQuantity("fsr", Dimension.Frequency);
            if (fsr is <= 0) throw t.AtValue("fsr", $"fsr must be positive but got {t.ValueText("fsr")}");

            var index = t.OptionalNumber("refractive_index") ?? 1.0;
            if (index < 1) throw t.AtValue("refractive_index", $"refractive_index must be at least 1 but got {t.ValueText("refractive_index")}");

            // Sharpness: finesse or mirror reflectance, exactly one.
            if (t.Has("finesse") && t.Has("reflectance"))
                throw t.AtKey("reflectance", $"instrument '{name}' gives both finesse and reflectance; expected exactly one of them");
            if (!t.Has("finesse") && !t.Has("reflectance"))
                throw t.AtHeader($"instrument '{name}' needs either finesse (a number of at least 1) or reflectance (mirror reflectance between 0 and 1) but has neither");
            var finesse = t.OptionalNumber("finesse");
            if (finesse < 1) throw t.AtValue("finesse", $"finesse must be at least 1 but got {t.ValueText("finesse")}");
            var reflectance = t.OptionalNumber("reflectance");
            if (reflectance is double r)
            {
                if (!(r > 0 && r < 1)) throw t.AtValue("reflectance", $"reflectance must lie strictly between 0 and 1 but got {t.ValueText("reflectance")}");
                var f = Airy.ReflectanceFinesse(r);
                if (f < 1) throw t.AtValue("reflectance", $"reflectance {t.ValueText("reflectance")} gives a finesse of {f:G3}, below 1; expected a reflectance of at least 0.085");
            }

            var loss = t.OptionalNumber("mirror_loss") ?? 0.0;
            if (!(loss >= 0 && loss < 1))
                throw t.AtValue("mirror_loss", $"mirror_loss must be a fraction from 0 up to (not including) 1 but got {t.ValueText("mirror_loss")}");
            if (reflectance is double rr && rr + loss >= 1)
                throw t.AtValue("mirror_loss", $"reflectance + mirror_loss must stay below 1 (the mirrors must transmit some light) but got {rr} + {loss}");

            // Mirror radii: starting points for the transverse families (Gouy offsets); they need the mirror spacing.
            var radius1 = t.OptionalQuantity("mirror_radius", Dimension.Length);
            if (radius1 is <= 0) throw t.AtValue("mirror_radius", $"mirror_radius must be positive but got {t.ValueText("mirror_radius")}");
            var radius2 = t.OptionalQuantity("mirror_radius_2", Dimension.Length);
            if (radius2 is <= 0) throw t.AtValue("mirror_radius_2", $"mirror_radius_2 must be positive but got {t.ValueText("mirror_radius_2")}");
            if (radius2 is not null && radius1 is null)
                throw t.AtKey("mirror_radius_2", $"instrument '{name}' gives mirror_radius_2 without mirror_radius; expected mirror_radius (first mirror, or both) and optionally mirror_radius_2 (second mirror)");
            if (radius1 is not null && length is null)
                throw t.AtKey("mirror_radius", $"instrument '{name}' gives mirror_radius but no length; the transverse-family offsets need the mirror spacing: give length instead of fsr");

            var spec = new InstrumentSpec
            {
                Name = name,
                MirrorRadiusM = radius1,
                MirrorRadius2M = radius2,
                Geometry = geometry,
                LengthM = length,
                FsrHz = fsr,
                RefractiveIndex = index,
                Finesse = finesse,
                Reflectance = reflectance,
                MirrorLoss = loss,
                FixFinesse = t.OptionalBool("fix_finesse") ?? false,
                Line = t.Line,
            };

            // Last guard for combinations the checks above let through (e.g. a length so small the FSR overflows).
            try
            {
                spec.ToInstrument();
            }
            catch (InputException e)
            {
                throw t.AtHeader(e.Message);
            }

            return spec;
        }

        private SweepSpec ReadSweep(SetupTomlTable t) => new()
        {
            Instrument = t.RequiredString("instrument", "the name of the [[instrument]] that took this sweep").Trim(),
            File = ReadFileOptions(t),
            Line = t.Line,
        };

        private CalibrationSpec ReadCalibration(SetupTomlTable t)
        {
            var instrument = t.RequiredString("instrument", "the name of the [[instrument]] this calibration sweep belongs to").Trim();
            var options = ReadFileOptions(t);
            var wavelength = t.OptionalQuantity("wavelength", Dimension.Length);
            if (wavelength is <= 0) throw t.AtValue("wavelength", $"wavelength must be positive but got {t.ValueText("wavelength")}");
            return new CalibrationSpec
            {
                Instrument = instrument,
                File = options,
                WavelengthM = wavelength,
                AxisDegree = ReadAxisDegree(t),
                Line = t.Line,
            };
        }

        private static int? ReadAxisDegree(SetupTomlTable t)
        {
            const string key = "axis_degree";
            if (!t.Has(key)) return null;
            var expected = $"expected an integer from 1 to {SetupSchema.MaxAxisDegree} or \"auto\"";
            switch (t.ValueNode(key))
            {
                case StringValueSyntax s when string.Equals(s.Value?.Trim(), "auto", StringComparison.OrdinalIgnoreCase):
                    return null;
                case IntegerValueSyntax i when i.Value >= 1 && i.Value <= SetupSchema.MaxAxisDegree:
                    return (int)i.Value;
                case var other:
                    throw t.AtValue(key, $"{key}: {expected} but got {SetupTomlTable.Describe(other as ValueSyntax)}");
            }
        }

        private SweepFileOptions ReadFileOptions(SetupTomlTable t)
        {
            var name = t.RequiredString("file", "the data file, relative to the setup file's folder");
            string resolved;
            try
            {
                resolved = Path.GetFullPath(Path.Combine(_directory, name.Trim()));
            }
            catch (Exception e) when (e is ArgumentException or NotSupportedException or PathTooLongException)
            {
                throw t.AtValue("file", $"file: expected a file name but got \"{name}\" ({e.Message})");
            }

            if (InputLimits.OutsideMessage(resolved, _directory, file) is string outside) throw t.AtValue("file", $"file: {outside}");
            if (Directory.Exists(resolved)) throw t.AtValue("file", $"file names a folder, not a file: {resolved}");
            if (!File.Exists(resolved)) throw t.AtValue("file", $"file not found: {resolved}");

            var rampFile = ReadRampFile(t);
            var scan = t.Choice("scan", Scans, ScanCoordinate.Time);
            var interval = t.OptionalQuantity("sample_interval", Dimension.Time);
            if (interval is <= 0) throw t.AtValue("sample_interval", $"sample_interval must be positive but got {t.ValueText("sample_interval")}");
            if (interval is not null && scan == ScanCoordinate.Ramp && rampFile is null)
                throw t.AtKey("sample_interval", "sample_interval rebuilds a time axis, which contradicts scan = \"ramp\"; remove one of the two");

            return new SweepFileOptions
            {
                Path = resolved,
                XColumn = ReadColumn(t, "x_column"),
                YColumn = ReadColumn(t, "y_column"),
                RampColumn = ReadColumn(t, "ramp_column"),
                Scan = scan,
                SampleIntervalS = interval,
                Delimiter = ReadDelimiter(t),
                DecimalComma = t.Choice("decimal", Decimals, null),
                HasHeader = ReadHeader(t),
                Directions = t.Choice("directions", Directions, DirectionChoice.Both),
                RampFile = rampFile,
                RampTimeColumn = ReadColumn(t, "ramp_time_column"),
                RampValueColumn = ReadColumn(t, "ramp_value_column"),
            };
        }

        /// <summary>The ramp_file key (one channel per file): its resolved path, or null; the ramp_*_column keys need it,
        /// and ramp_column (a ramp in the signal's own file) contradicts it.</summary>
        private string? ReadRampFile(SetupTomlTable t)
        {
            if (!t.Has("ramp_file"))
            {
                foreach (var key in new[] { "ramp_time_column", "ramp_value_column" })
                    if (t.Has(key)) throw t.AtKey(key, $"{key} names a column of the ramp file, but no ramp_file is given");
                return null;
            }

            if (t.Has("ramp_column"))
                throw t.AtKey("ramp_file", "ramp_file and ramp_column both name the ramp; give ramp_column when the ramp is in the signal's file, ramp_file when it is in a file of its own");
            var name = t.RequiredString("ramp_file", "the file holding the recorded ramp, relative to the setup file's folder");
            string resolved;
            try
            {
                resolved = Path.GetFullPath(Path.Combine(_directory, name.Trim()));
            }
            catch (Exception e) when (e is ArgumentException or NotSupportedException or PathTooLongException)
            {
                throw t.AtValue("ramp_file", $"ramp_file: expected a file name but got \"{name}\" ({e.Message})");
            }

            if (Directory.Exists(resolved)) throw t.AtValue("ramp_file", $"ramp_file names a folder, not a file: {resolved}");
            if (!File.Exists(resolved)) throw t.AtValue("ramp_file", $"ramp_file not found: {resolved}");
            return resolved;
        }

        private static string? ReadColumn(SetupTomlTable t, string key)
        {
            if (!t.Has(key)) return null;
            switch (t.ValueNode(key))
            {
                case IntegerValueSyntax i when i.Value >= 1:
                    return i.Value.ToString(System.Globalization.CultureInfo.InvariantCulture);
                case StringValueSyntax s when !string.IsNullOrWhiteSpace(s.Value):
                    if (s.Value.Trim() is var text && int.TryParse(text, out var n) && n < 1)
                        throw t.AtValue(key, $"{key}: column numbers start at 1 but got \"{s.Value}\"");
                    return s.Value.Trim();
                case var other:
                    throw t.AtValue(key, $"{key}: expected a column header name in quotes or a column number from 1 up but got {SetupTomlTable.Describe(other as ValueSyntax)}");
            }
        }

        private static char? ReadDelimiter(SetupTomlTable t)
        {
            const string key = "delimiter";
            if (t.ValueNode(key) is StringValueSyntax { Value: "\t" }) return '\t'; // a literal tab written as "\t"
            return t.Choice(key, Delimiters, null);
        }

        private static bool? ReadHeader(SetupTomlTable t)
        {
            const string key = "header";
            if (t.ValueNode(key) is BooleanValueSyntax b) return b.Value;
            if (t.Has(key) && t.ValueNode(key) is not StringValueSyntax)
                throw t.AtValue(key, $"{key} must be true, false or \"auto\" but got {SetupTomlTable.Describe(t.ValueNode(key) as ValueSyntax)}");
            return t.Choice(key, Headers, null);
        }

        private static SolveOptions ReadSolve(SetupTomlTable t)
        {
            double? start = null, end = null;
            if (t.Has("window"))
            {
                if (t.ValueNode("window") is not ArraySyntax array || array.Items.ChildrenCount != 2)
                    throw t.AtValue("window", $"window must be an array of two frequencies, such as [\"-12 GHz\", \"12 GHz\"], but got {Describe(t.ValueNode("window"))}");
                var first = array.Items.GetChild(0)?.Value;
                var second = array.Items.GetChild(1)?.Value;
                start = t.Quantity("window start", first, Dimension.Frequency);
                end = t.Quantity("window end", second, Dimension.Frequency);
                if (start >= end)
                    throw t.AtValue("window", $"window must run from a lower to a higher frequency but got {SetupTomlTable.RawText(first)} to {SetupTomlTable.RawText(second)}");
            }

            var step = t.OptionalQuantity("grid_step", Dimension.Frequency);
            if (step is <= 0) throw t.AtValue("grid_step", $"grid_step must be positive but got {t.ValueText("grid_step")}");
            var sparsity = t.OptionalNumber("sparsity") ?? 3.0;
            if (sparsity < 0) throw t.AtValue("sparsity", $"sparsity must be zero or positive but got {t.ValueText("sparsity")}");
            var smoothness = t.OptionalNumber("smoothness") ?? 0.0;
            if (smoothness < 0) throw t.AtValue("smoothness", $"smoothness must be zero or positive but got {t.ValueText("smoothness")}");
            var anchor = t.OptionalQuantity("anchor_frequency", Dimension.Frequency);
            if (anchor is <= 0) throw t.AtValue("anchor_frequency", $"anchor_frequency must be positive but got {t.ValueText("anchor_frequency")}");
            var snr = t.OptionalNumber("min_snr") ?? 5.0;
            if (snr <= 0) throw t.AtValue("min_snr", $"min_snr must be positive but got {t.ValueText("min_snr")}");
            var wavelength = t.OptionalQuantity("source_wavelength", Dimension.Length);
            if (wavelength is <= 0) throw t.AtValue("source_wavelength", $"source_wavelength must be positive but got {t.ValueText("source_wavelength")}");

            var refine = t.OptionalBool("refine") ?? true;
            var fitWidths = t.OptionalBool("fit_widths") ?? false;
            var bootstrap = t.OptionalNumber("bootstrap") ?? 0;
            if (bootstrap < 0 || bootstrap != Math.Floor(bootstrap) || bootstrap > 10000)
                throw t.AtValue("bootstrap", $"bootstrap must be a whole number of replicates from 0 to 10000 but got {t.ValueText("bootstrap")}");
            var doubtful = t.OptionalNumber("doubtful_delta_chi2") ?? 25.0;
            if (doubtful <= 0) throw t.AtValue("doubtful_delta_chi2", $"doubtful_delta_chi2 must be positive but got {t.ValueText("doubtful_delta_chi2")}");

            var maxMemory = t.OptionalNumber("max_memory_gb") ?? 4.0;
            if (!(maxMemory > 0) || maxMemory > 1e6) throw t.AtValue("max_memory_gb", $"max_memory_gb must be a positive number of gigabytes (up to 10⁶) but got {t.ValueText("max_memory_gb")}");
            var knownInterval = t.OptionalQuantity("known_interval", Dimension.Frequency);
            if (knownInterval is <= 0) throw t.AtValue("known_interval", $"known_interval must be a positive frequency but got {t.ValueText("known_interval")}");

            return new SolveOptions
            {
                SelfCalibrate = t.Choice("self_calibrate", SelfCalibrationModes, SelfCalibrationMode.Auto),
                Solver = t.Choice("solver", SolverChoices, SolverChoice.Auto),
                MaxMemoryGb = maxMemory,
                KnownIntervalHz = knownInterval,
                RefineFsr = t.OptionalBool("refine_fsr") ?? false,
                Refine = refine,
                FitWidths = fitWidths,
                Bootstrap = (int)bootstrap,
                DoubtfulDeltaChiSquare = doubtful,
                WindowStartHz = start,
                WindowEndHz = end,
                GridStepHz = step,
                Sparsity = sparsity,
                Smoothness = smoothness,
                AnchorFrequencyHz = anchor,
                MinSnr = snr,
                SourceWavelengthM = wavelength,
            };

            static string Describe(SyntaxNodeBase? node) => node switch
            {
                ArraySyntax a => $"an array of {a.Items.ChildrenCount} item(s)",
                ValueSyntax v => SetupTomlTable.Describe(v),
                _ => "nothing",
            };
        }

        /// <summary>Checks that need the whole file: names, references, required tables.</summary>
        private Setup Finish()
        {
            if (_instruments.Count == 0)
                throw new InputException("the setup has no [[instrument]] table; expected at least one cavity description", file);

            var byName = new Dictionary<string, SetupTomlTable>(StringComparer.Ordinal);
            foreach (var (spec, table) in _instruments)
            {
                if (byName.TryGetValue(spec.Name, out var earlier))
                    throw table.AtValue("name", $"instrument name '{spec.Name}' is already used by the [[instrument]] on line {earlier.Line}; names must be unique");
                byName[spec.Name] = table;
            }

            if (_sweeps.Count == 0)
                throw new InputException("the setup has no [[sweep]] table; expected at least one measured sweep file", file);

            foreach (var (spec, table) in _sweeps) CheckReference(spec.Instrument, table, byName);

            var calibrated = new Dictionary<string, SetupTomlTable>(StringComparer.Ordinal);
            foreach (var (spec, table) in _calibrations)
            {
                CheckReference(spec.Instrument, table, byName);
                if (calibrated.TryGetValue(spec.Instrument, out var earlier))
                    throw table.AtValue("instrument", $"instrument '{spec.Instrument}' already has a [[calibration]] (line {earlier.Line}); expected at most one per instrument");
                calibrated[spec.Instrument] = table;
            }

            return new Setup
            {
                Path = Path.GetFullPath(file),
                Instruments = _instruments.Select(i => i.Spec).ToArray(),
                Sweeps = _sweeps.Select(s => s.Spec).ToArray(),
                Calibrations = _calibrations.Select(c => c.Spec).ToArray(),
                Solve = _solve ?? new SolveOptions(),
            };
        }

        private static void CheckReference(string instrument, SetupTomlTable table, Dictionary<string, SetupTomlTable> byName)
        {
            if (byName.ContainsKey(instrument)) return;
            var near = SetupSchema.Closest(instrument, byName.Keys);
            var hint = near is null ? "" : $"; did you mean '{near}'?";
            throw table.AtValue("instrument",
                $"{table.Title} names instrument '{instrument}', which no [[instrument]] defines (defined: {string.Join(", ", byName.Keys)}){hint}");
        }
    }
}

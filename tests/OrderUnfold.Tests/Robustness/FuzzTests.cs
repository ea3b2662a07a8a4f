using System.Diagnostics;
using System.Globalization;
using System.Text;
using CsCheck;
using OrderUnfold.Calibration;
using OrderUnfold.Io;
using OrderUnfold.Pipeline;
using OrderUnfold.Pipeline.Batch;
using OrderUnfold.Simulation;
using OrderUnfold.Tests.CommandLine;
using Xunit;
using Xunit.Abstractions;

namespace OrderUnfold.Tests.Robustness;

/// <summary>
/// Property-based fuzzing (CsCheck) of every reader the tool has for user files — sweep files, setup files, manifests
/// and calibration files — with inputs mutated from valid ones (SIMULATED DATA) and random text, and of the whole unfold
/// pipeline on small sizes for a fraction of the sweep inputs. Property: every input is read or refused with an
/// <see cref="InputException"/> that names the file (with its line and column where the reader knows them) and repeats no
/// more than a clipped cell; nothing else is thrown, no input takes over 20 s, none allocates over 2 GB.
/// <para>
/// The default share (<see cref="DefaultInputs"/>) runs with the suite; CI raises it with ORDERUNFOLD_FUZZ_INPUTS (see
/// .ci/run: <c>--filter Category=Fuzz</c>). ORDERUNFOLD_FUZZ_SEED replays a CsCheck seed; every crash is reported with
/// the (kind, seed) pair that rebuilds its input, and ORDERUNFOLD_FUZZ_REPORT names a file the counts are written to.
/// </para>
/// </summary>
[Trait("Category", "Fuzz")]
public sealed class FuzzTests(FuzzTemplates t, ITestOutputHelper output) : IClassFixture<FuzzTemplates>
{
    /// <summary>Inputs of the default run (seconds on two cores).</summary>
    public const int DefaultInputs = 1500;

    /// <summary>About one in this many sweep inputs also runs the whole pipeline (unfold of a small two-cavity case).</summary>
    public const int PipelineEvery = 100;

    private static readonly TimeSpan InputBudget = TimeSpan.FromSeconds(20);
    private const long AllocationBudget = 2L << 30;

    private enum Kind { Sweep, Setup, Manifest, Calibration, Pipeline }

    private sealed class Counts
    {
        public long Tried, Accepted, Refused, WithLineAndColumn, WithLine, FileOnly, Crashes, Hangs, PipelineRuns;
        public long MaxAllocated;
        public readonly List<string> CrashList = [];
    }

    [Fact]
    public void ReadersAndPipelineReadOrRefuseEveryInput()
    {
        var inputs = int.TryParse(Environment.GetEnvironmentVariable("ORDERUNFOLD_FUZZ_INPUTS"), NumberStyles.Integer, CultureInfo.InvariantCulture, out var n) && n > 0 ? n : DefaultInputs;
        var seed = Environment.GetEnvironmentVariable("ORDERUNFOLD_FUZZ_SEED");
        var counts = new Counts();
        var clock = Stopwatch.StartNew();
        var gen = Gen.Select(Gen.Int[0, 99], Gen.ULong, Gen.Int[0, PipelineEvery - 1],
            (k, s, p) => (Kind: k < 30 ? Kind.Sweep : k < 55 ? Kind.Setup : k < 75 ? Kind.Manifest : Kind.Calibration, Seed: s, Pipeline: p == 0));
        string? csSeed = null;
        gen.Sample(x => One(x.Kind, x.Seed, x.Pipeline, counts), seed: seed, iter: inputs, threads: 1,
            writeLine: line => csSeed = line, print: x => $"{x.Kind}:{x.Seed}");

        var report = new StringBuilder()
            .AppendLine(CultureInfo.InvariantCulture, $"fuzz: seed {seed ?? "random per run (set ORDERUNFOLD_FUZZ_SEED to a CsCheck seed to replay; each crash below names its kind:seed)"}")
            .AppendLine(CultureInfo.InvariantCulture, $"fuzz: inputs tried {counts.Tried} (pipeline runs {counts.PipelineRuns}) in {clock.Elapsed.TotalSeconds:F1} s; accepted {counts.Accepted}; refused {counts.Refused}: " +
                                                      $"with file:line:column {counts.WithLineAndColumn}, file:line {counts.WithLine}, file only {counts.FileOnly}")
            .AppendLine(CultureInfo.InvariantCulture, $"fuzz: crashes {counts.Crashes}; hangs (> {InputBudget.TotalSeconds:F0} s) {counts.Hangs}; largest allocation by one input {counts.MaxAllocated / 1e6:F1} MB");
        if (csSeed is not null) report.AppendLine("fuzz: CsCheck: " + csSeed);
        foreach (var c in counts.CrashList.Take(20)) report.AppendLine("fuzz: crash " + c);
        output.WriteLine(report.ToString());
        Console.WriteLine(report.ToString());
        if (Environment.GetEnvironmentVariable("ORDERUNFOLD_FUZZ_REPORT") is { Length: > 0 } path) File.WriteAllText(path, report.ToString());

        Assert.Equal(inputs, counts.Tried - counts.PipelineRuns);
        Assert.True(counts.Crashes == 0, report.ToString());
        Assert.True(counts.Hangs == 0, report.ToString());
        Assert.True(counts.MaxAllocated < AllocationBudget, report.ToString());
    }

    private void One(Kind kind, ulong seed, bool pipeline, Counts counts)
    {
        Run(kind, seed, counts);
        if (kind == Kind.Sweep && pipeline) Run(Kind.Pipeline, seed, counts);
    }

    private void Run(Kind kind, ulong seed, Counts counts)
    {
        var random = new Random((int)(seed ^ (seed >> 32)));
        var template = kind switch
        {
            Kind.Sweep => t.Sweep,
            Kind.Pipeline => t.PipelineSweep,
            Kind.Setup => t.Setup,
            Kind.Manifest => t.Manifest,
            _ => t.Calibration,
        };
        var text = random.Next(10) == 0 ? RandomText(random) : Mutate(template, random);
        var folder = kind == Kind.Pipeline ? t.PipelineFolder : t.Scratch;
        var path = kind switch
        {
            Kind.Sweep => Path.Combine(folder, "fuzz-sweep.csv"),
            Kind.Pipeline => Path.Combine(folder, "A_source.csv"),
            Kind.Setup => Path.Combine(t.Base, "fuzz-setup.toml"), // beside the sweep files it names
            Kind.Manifest => Path.Combine(folder, "fuzz-manifest.csv"),
            _ => Path.Combine(folder, "fuzz-calibration.json"),
        };
        counts.Tried++;
        if (kind == Kind.Pipeline) counts.PipelineRuns++;
        using var budget = new CancellationTokenSource(InputBudget); // handed to the readers and the pipeline, whose loops check it
        var allocated = GC.GetAllocatedBytesForCurrentThread();
        try
        {
            if (kind != Kind.Setup) File.WriteAllText(path, text);
            switch (kind)
            {
                case Kind.Sweep:
                    SweepReader.ReadSweeps(t.SweepOptions with { Path = path }, budget.Token);
                    break;
                case Kind.Pipeline:
                    UnfoldPipeline.Run(Path.Combine(folder, "setup.toml"), cancellationToken: budget.Token);
                    break;
                case Kind.Setup:
                    SetupReader.ReadText(text, path);
                    break;
                case Kind.Manifest:
                    foreach (var _ in Manifest.ReadLines(path, InputLimits.ReadLines(path, "manifest", budget.Token))) { }
                    break;
                default:
                    SavedCalibration.Read(path);
                    break;
            }

            counts.Accepted++;
        }
        catch (InputException e)
        {
            counts.Refused++;
            if (e.Line is not null && e.Column is not null) counts.WithLineAndColumn++;
            else if (e.Line is not null) counts.WithLine++;
            else counts.FileOnly++;
            var problem = e.File is null ? "names no file"
                : e.Message.Length > InputException.MaxMessageChars ? "message too long"
                : e.Message.Contains(new string(LongCell, InputLimits.EchoChars + 1), StringComparison.Ordinal) ? "echoes more than a clipped cell"
                : null;
            if (problem is not null) Crash(counts, kind, seed, $"refusal {problem}: {InputLimits.Clip(e.Located, 300)}");
        }
        catch (OperationCanceledException) when (budget.IsCancellationRequested)
        {
            counts.Hangs++;
            counts.CrashList.Add($"{kind}:{seed}: over {InputBudget.TotalSeconds:F0} s");
        }
        catch (Exception e)
        {
            Crash(counts, kind, seed, $"{e.GetType().Name}: {InputLimits.Clip(e.Message, 200)}");
        }
        finally
        {
            counts.MaxAllocated = Math.Max(counts.MaxAllocated, GC.GetAllocatedBytesForCurrentThread() - allocated);
        }
    }

    private static void Crash(Counts counts, Kind kind, ulong seed, string what)
    {
        counts.Crashes++;
        counts.CrashList.Add($"{kind}:{seed}: {what}");
    }

    /// <summary>The character of the long cells the mutations insert (to check that messages clip them).</summary>
    private const char LongCell = 'Ж';

    private static readonly string[] Tokens =
    [
        "", ",", ";", "\t", "\"", "\"\"", "'", "#", "=", "[", "]", "[[sweep]]", "[[instrument]]", "[[calibration]]", "[solve]", "{", "}", ":", "null",
        "NaN", "nan", "-inf", "Infinity", "1e400", "-1e308", "4.9e-324", "0", "-0", "1,5", "1.5.5", "0x10", "١٢", "\u0000", "\u00a0", "\ufeff", "\r", "\n", "\r\n",
        "file = \"../outside.csv\"", "file = \"/dev/zero\"", "file = \"/etc/passwd\"", "grid_step = \"1 Hz\"", "window = [\"-1 GHz\", \"1 GHz\"]",
        "length = \"0 mm\"", "finesse = -3", "\"format\"", "\"version\": 99", "\"axes\": []", "\"coefficients\": [1e308, 1e308]",
        "id,setup,files,calibration,timestamp", "../../x.csv", "/abs/path.csv", "=HYPERLINK(\"http://x\";\"y\")", "@cmd", "2025-13-45T99:99:99Z",
    ];

    private static string Mutate(string text, Random r)
    {
        var sb = new StringBuilder(text);
        var ops = 1 + r.Next(8);
        for (var k = 0; k < ops; k++)
        {
            var at = sb.Length == 0 ? 0 : r.Next(sb.Length);
            switch (r.Next(9))
            {
                case 0: // replace a character
                    if (sb.Length > 0) sb[at] = (char)r.Next(0, 0x3000);
                    break;
                case 1: // delete a span
                    sb.Remove(at, Math.Min(sb.Length - at, 1 + r.Next(200)));
                    break;
                case 2: // duplicate a span
                    var len = Math.Min(sb.Length - at, 1 + r.Next(400));
                    sb.Insert(at, sb.ToString(at, len));
                    break;
                case 3: // insert a token
                case 4:
                    sb.Insert(at, Tokens[r.Next(Tokens.Length)]);
                    break;
                case 5: // truncate
                    sb.Length = at;
                    break;
                case 6: // a long cell
                    sb.Insert(at, new string(LongCell, 100 + r.Next(5000)));
                    break;
                case 7: // a random number
                    sb.Insert(at, (r.NextDouble() * Math.Pow(10, r.Next(-320, 320))).ToString("R", CultureInfo.InvariantCulture));
                    break;
                default: // swap two lines
                    var lines = sb.ToString().Split('\n');
                    if (lines.Length > 2)
                    {
                        int i = r.Next(lines.Length), j = r.Next(lines.Length);
                        (lines[i], lines[j]) = (lines[j], lines[i]);
                        sb.Clear().Append(string.Join('\n', lines));
                    }

                    break;
            }
        }

        return sb.ToString();
    }

    private static string RandomText(Random r)
    {
        var sb = new StringBuilder();
        var length = r.Next(2000);
        for (var i = 0; i < length; i++)
            sb.Append(r.Next(4) switch { 0 => Tokens[r.Next(Tokens.Length)], 1 => (char)r.Next(32, 127), 2 => (char)r.Next(0, 0x3000), _ => r.Next(10).ToString(CultureInfo.InvariantCulture) });
        return sb.ToString();
    }
}

/// <summary>The valid inputs the fuzzing mutates (SIMULATED DATA) and its scratch folders.</summary>
public sealed class FuzzTemplates : IDisposable
{
    private readonly CliTestFolder _cli = new();

    public FuzzTemplates()
    {
        Base = _cli.Base;
        Scratch = _cli.Copy("fuzz-scratch");
        // the reader templates: the first 300 rows of a simulated sweep, its setup, a manifest and a saved calibration
        Sweep = string.Join('\n', File.ReadLines(Path.Combine(Base, "A_source.csv")).Take(300)) + "\n";
        Setup = File.ReadAllText(Path.Combine(Base, "setup.toml"));
        Manifest = "id,setup,files,calibration,timestamp\n" +
                   "item-001,setup.toml,A_source.csv;B_source.csv,calibration.json,2025-03-14T09:00:05Z\n" +
                   "item-002,setup.toml,A_source.csv;B_source.csv,,2025-03-14T09:00:10Z\n";
        var set = UnfoldPipeline.Calibrate(SetupReader.Read(Path.Combine(Base, "setup.toml")), null, out _);
        Calibration = CalibrationFile.ToJson(set);
        SweepOptions = SetupReader.Read(Path.Combine(Base, "setup.toml")).Sweeps[0].File;

        // the pipeline case: a small two-cavity simulation (1 500 samples per record, SIMULATED DATA)
        PipelineFolder = Path.Combine(_cli.Root, "fuzz-pipeline");
        SimulationFiles.Write(CliTestFolder.Spec(spanFsr: 4, samples: 1500), PipelineFolder);
        PipelineSweep = File.ReadAllText(Path.Combine(PipelineFolder, "A_source.csv"));
    }

    public string Base { get; }
    public string Scratch { get; }
    public string PipelineFolder { get; }
    public string Sweep { get; }
    public string PipelineSweep { get; }
    public string Setup { get; }
    public string Manifest { get; }
    public string Calibration { get; }
    public SweepFileOptions SweepOptions { get; }

    public void Dispose() => _cli.Dispose();
}

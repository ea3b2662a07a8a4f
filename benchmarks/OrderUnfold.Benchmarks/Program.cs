using BenchmarkDotNet.Running;

namespace OrderUnfold.Benchmarks;

/// <summary>
/// Entry point. <c>dotnet run -c Release --project benchmarks/OrderUnfold.Benchmarks -- --filter '*'</c> runs the
/// BenchmarkDotNet suite; <c>-- --cpu-time</c> runs <see cref="CpuTimeProbe"/> (CPU time next to wall time);
/// <c>-- --cpu-time-refine</c> only its line-refinement part (the nine-mode comb of <see cref="RefineCombBenchmark"/>);
/// <c>-- --unfold-probe [--marks]</c> the whole unfold at 10⁴–10⁶ bins in CPU time (with the progress marks);
/// <c>-- --working-set-probe</c> one NNLS solve at those sizes with and without the active set's working set;
/// <c>-- --dense-probe [--with-active-set] [--family standard|fine|wide]</c> the dense solver's CPU-time probe on one
/// family of sizes (see <see cref="DenseNnlsBenchmarks.Probe(TextWriter, bool, string)"/>);
/// <c>-- --export-dense DIR [--family F]</c> writes the dense-support problems (of family F) for the scipy reference script.
/// </summary>
public static class Program
{
    public static void Main(string[] args)
    {
        if (args.Length == 1 && args[0] == "--cpu-time-refine")
        {
            CpuTimeProbe.RunRefinement(Console.Out);
            return;
        }

        if (args.Length == 1 && args[0] == "--cpu-time")
        {
            CpuTimeProbe.Run(Console.Out);
            return;
        }

        if (args.Length >= 1 && args[0] == "--unfold-probe")
        {
            UnfoldScalingBenchmarks.Probe(Console.Out, args.Length > 1 && args[1] == "--marks");
            return;
        }

        if (args.Length == 1 && args[0] == "--working-set-probe")
        {
            UnfoldScalingBenchmarks.WorkingSetProbe(Console.Out);
            return;
        }

        if (args.Length >= 1 && args[0] == "--dense-probe")
        {
            // --dense-probe [--with-active-set] [--family standard|fine|wide]
            var family = Array.IndexOf(args, "--family") is var i and > 0 && i + 1 < args.Length ? args[i + 1] : "standard";
            DenseNnlsBenchmarks.Probe(Console.Out, args.Contains("--with-active-set"), family);
            return;
        }

        if ((args.Length == 2 || (args.Length == 4 && args[2] == "--family")) && args[0] == "--export-dense")
        {
            // the dense-support problems of DenseNnlsBenchmarks as dense arrays, for tests/reference/dense_nnls_reference.py
            var family = args.Length == 4 ? args[3] : "standard";
            foreach (var (rows, bins) in DenseNnlsBenchmarks.Sizes)
            {
                var dir = Path.Combine(args[1], $"{rows}x{bins}");
                DenseSupportCase.Create(rows, bins, DenseNnlsBenchmarks.FamilyWindow(family, bins)).Export(dir);
                Console.WriteLine($"wrote {dir}");
            }

            return;
        }

        BenchmarkSwitcher.FromAssembly(typeof(Program).Assembly).Run(args);
    }
}

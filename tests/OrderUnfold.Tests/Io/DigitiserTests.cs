using OrderUnfold.Io;
using Xunit;

namespace OrderUnfold.Tests.Io;

/// <summary>Quantisation step and clipping read from the values. All records here are simulated (made up for the test).</summary>
public sealed class DigitiserTests
{
    /// <summary>Simulated record: peaks of height <paramref name="height"/> every 500 samples, Lorentzian FWHM 30 samples,
    /// Gaussian noise σ, then an 8-bit scope over [lo, hi] (rounded to the code and clamped at full scale) when bits &gt; 0.</summary>
    private static double[] Record(int n, double height, double sigma, int bits, double lo, double hi, int seed, int printDecimals = -1)
    {
        var rng = new Random(seed);
        var y = new double[n];
        var lsb = (hi - lo) / (1 << bits);
        for (var i = 0; i < n; i++)
        {
            var d = (i % 500 - 250) / 15.0;
            var v = 0.03 + height / (1 + d * d) + sigma * OrderUnfold.Simulation.Simulator.Gaussian(rng);
            if (bits > 0) v = lo + Math.Clamp(Math.Round((v - lo) / lsb), 0, (1 << bits) - 1) * lsb;
            y[i] = printDecimals >= 0 ? Math.Round(v, printDecimals) : v;
        }

        return y;
    }

    [Fact]
    public void Finds_the_step_of_an_8_bit_record_also_when_printed_rounded()
    {
        var exact = Record(5000, 0.6, 0.004, 8, -0.1, 0.9, 1);
        Assert.Equal(1.0 / 256, Digitiser.QuantisationStep(exact)!.Value, 9);
        var printed = Record(5000, 0.6, 0.004, 8, -0.1, 0.9, 1, printDecimals: 5); // 0.0039 and 0.00391 steps
        Assert.InRange(Digitiser.QuantisationStep(printed)!.Value, 1.0 / 256 * 0.999, 1.0 / 256 * 1.001);
    }

    [Fact]
    public void Finds_the_step_of_a_sparsely_filled_12_bit_record()
    {
        var y = Record(300, 1.5, 0.01, 12, -5, 5, 2, printDecimals: 5);
        Assert.InRange(Digitiser.QuantisationStep(y)!.Value, 10.0 / 4096 * 0.999, 10.0 / 4096 * 1.001);
    }

    [Theory]
    [InlineData(-1)]
    [InlineData(6)]
    [InlineData(4)]
    public void Claims_no_step_on_continuous_values(int printDecimals)
    {
        Assert.Null(Digitiser.QuantisationStep(Record(5000, 0.6, 0.004, 0, 0, 0, 3, printDecimals)));
        Assert.Null(Digitiser.QuantisationStep(Record(300, 0.6, 0.004, 0, 0, 0, 4, printDecimals)));
    }

    [Fact]
    public void Claims_no_step_from_a_handful_of_values()
    {
        Assert.Null(Digitiser.QuantisationStep([0.1, 0.2, 0.3, 0.2, 0.1, 0.4]));
    }

    [Fact]
    public void Clipping_at_full_scale_is_found_and_all_of_it()
    {
        // peaks of 1.2 on an 8-bit scope whose range ends at 1.0: their tops are cut flat at the top code
        var y = Record(3000, 1.2, 0.004, 8, -0.2, 1.0, 5);
        var lsb = Digitiser.QuantisationStep(y);
        var clipped = Digitiser.ClippedSamples(y, lsb);
        var top = y.Max();
        Assert.Equal(Enumerable.Range(0, y.Length).Where(i => y[i] == top), clipped);
        Assert.True(clipped.Length > 6 * 5, $"{clipped.Length} clipped samples");
    }

    [Fact]
    public void Unclipped_records_give_no_clipped_samples()
    {
        var quantised = Record(3000, 0.6, 0.004, 8, -0.2, 1.0, 6);
        Assert.Empty(Digitiser.ClippedSamples(quantised, Digitiser.QuantisationStep(quantised)));
        var quiet = Record(3000, 0.6, 0.0005, 8, -0.2, 1.0, 7); // noise below the step: flat baseline, rounded tops
        Assert.Empty(Digitiser.ClippedSamples(quiet, Digitiser.QuantisationStep(quiet)));
        var continuous = Record(3000, 0.6, 0.004, 0, 0, 0, 8);
        Assert.Empty(Digitiser.ClippedSamples(continuous, null));
    }

    [Fact]
    public void Clipping_of_continuous_values_is_a_run_of_one_value_at_the_extreme()
    {
        var y = Record(3000, 0.6, 0.004, 0, 0, 0, 9).Select(v => Math.Min(v, 0.5)).ToArray();
        var clipped = Digitiser.ClippedSamples(y, null);
        Assert.Equal(Enumerable.Range(0, y.Length).Where(i => y[i] == 0.5), clipped);
    }

    [Fact]
    public void Split_sweeps_carry_the_step_and_their_own_clipped_samples()
    {
        var y = Record(2000, 1.2, 0.004, 8, -0.2, 1.0, 10);
        var ramp = Enumerable.Range(0, 2000).Select(i => i < 1000 ? i / 100.0 : (2000 - i) / 100.0).ToArray();
        var trace = new RawTrace { Source = "simulated", X = ramp, Y = y, Ramp = ramp, Lines = Enumerable.Range(1, 2000).ToArray(), Scan = ScanCoordinate.Ramp };
        var sweeps = SweepReader.Split(trace);
        var all = Digitiser.ClippedSamples(y, Digitiser.QuantisationStep(y));
        Assert.Equal(all, sweeps.SelectMany(s => s.ClippedSamples.Select(i => i + s.FirstSample)));
        Assert.All(sweeps, s => Assert.All(s.ClippedSamples, i => Assert.Equal(y.Max(), s.Y[i])));
        Assert.All(sweeps, s => Assert.Equal(1.2 / 256, s.QuantisationStep!.Value, 9));
    }

    [Fact]
    public void Demo_sweeps_have_the_8_bit_step_and_no_clipping()
    {
        // data/demo: simulated, 8-bit over 8 % below the offset to 115 % of the largest signal above it (Simulator.Trace)
        var setup = SetupReader.Read(Path.Combine(RepositoryRoot.Folder, "data", "demo", "setup.toml"));
        foreach (var file in setup.Sweeps.Select(s => s.File).Concat(setup.Calibrations.Select(c => c.File)))
        {
            var sweeps = SweepReader.ReadSweeps(file);
            Assert.All(sweeps, s => Assert.NotNull(s.QuantisationStep));
            Assert.All(sweeps, s => Assert.Empty(s.ClippedSamples));
            var y = sweeps.SelectMany(s => s.Y).ToArray();
            var step = sweeps[0].QuantisationStep!.Value;
            Assert.InRange((y.Max() - y.Min()) / step, 50, 255); // the record spans part of the 255 steps
        }
    }
}

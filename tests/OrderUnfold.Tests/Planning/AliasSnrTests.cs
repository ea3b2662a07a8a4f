using OrderUnfold.Analysis;
using OrderUnfold.Instruments;
using OrderUnfold.Planning;
using Xunit;

namespace OrderUnfold.Tests.Planning;

/// <summary>The SNR estimate's closed form (Lorentzian approximation) against a direct sum over an Airy sweep.</summary>
public class AliasSnrTests
{
    [Theory]
    [InlineData(150, 0.5)]
    [InlineData(150, 3)]
    [InlineData(300, 1)]
    public void ClosedFormMatchesASumOverSampledAiryPeaks(double finesse, double misfitLinewidths)
    {
        // one instrument, a line moved by m linewidths: Σ (T(x) − T(x − d))² over a sweep of 1 FSR sampled at
        // 1250 points, against P·n·(π/2)·m²/(1 + m²) with n = 1250/𝓕 samples per linewidth and P = 1 pass
        var inst = new Instrument("x", 1.5e9, finesse);
        var samples = 1250;
        var d = misfitLinewidths * inst.LinewidthHz;
        var sum = 0.0;
        for (var i = 0; i < samples; i++)
        {
            var x = (i + 0.5) / samples * inst.FsrHz - inst.FsrHz / 2;
            var diff = inst.Transmission(x) - inst.Transmission(x - d);
            sum += diff * diff;
        }

        Assert.Equal(misfitLinewidths, AliasMargin.Misfit(inst, d), 9);
        var closed = AliasSnr.ChiSquarePerUnitSnr([inst], d, new SweepSampling(samples, 1));
        Assert.InRange(closed / sum, 0.97, 1.03);

        var snr = AliasSnr.RequiredPeakSnr([inst], d, new SweepSampling(samples, 1), 25);
        Assert.Equal(25, snr * snr * sum, 25 * 0.06);
    }

    [Fact]
    public void AnExactAliasNeedsInfiniteSnr()
    {
        var inst = new Instrument("x", 1.5e9, 150);
        Assert.True(double.IsPositiveInfinity(AliasSnr.RequiredPeakSnr([inst], 3 * inst.FsrHz, new SweepSampling())));
    }
}

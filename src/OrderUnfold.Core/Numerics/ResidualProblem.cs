namespace OrderUnfold.Numerics;

/// <summary>Fills the whitened residuals r = (y − model)/σ (length m) and, when <paramref name="jacobian"/> is not null,
/// the m × n whitened Jacobian ∂model/∂p / σ. Entries the function does not write keep their previous values.</summary>
public delegate void ResidualFunction(double[] parameters, double[] residual, double[,]? jacobian);

/// <summary>
/// A least-squares problem given by its residuals and dense Jacobian (a handful to a few dozen parameters, up to some
/// ten thousand residuals), turned into the normal equations that <see cref="LevenbergMarquardt"/> works on:
/// JᵀJ, Jᵀr and χ² = Σ r². Rows of J that are all zero are skipped.
/// </summary>
public sealed class ResidualProblem(ResidualFunction evaluate, int parameterCount, int residualCount) : ILeastSquaresProblem
{
    private readonly double[] _residual = new double[residualCount];
    private readonly double[,] _jacobian = new double[residualCount, parameterCount];
    private readonly double[] _row = new double[parameterCount];

    /// <inheritdoc />
    public int Count => parameterCount;

    /// <inheritdoc />
    public double Normal(double[] p, double[] jtj, double[] jtr)
    {
        evaluate(p, _residual, _jacobian);
        var n = parameterCount;
        Array.Clear(jtj);
        Array.Clear(jtr);
        var chiSquare = 0.0;
        for (var k = 0; k < residualCount; k++)
        {
            chiSquare += _residual[k] * _residual[k];
            var any = false;
            for (var i = 0; i < n; i++)
            {
                _row[i] = _jacobian[k, i];
                if (_row[i] != 0) any = true;
            }

            if (any) AddRow(jtj, jtr, _residual[k]);
        }

        for (var i = 0; i < n; i++)
            for (var j = 0; j < i; j++) jtj[i * n + j] = jtj[j * n + i];
        return chiSquare;
    }

    private void AddRow(double[] jtj, double[] jtr, double residual)
    {
        var n = parameterCount;
        for (var i = 0; i < n; i++)
        {
            var ji = _row[i];
            if (ji == 0) continue;
            jtr[i] += ji * residual;
            for (var j = i; j < n; j++) jtj[i * n + j] += ji * _row[j];
        }
    }
}

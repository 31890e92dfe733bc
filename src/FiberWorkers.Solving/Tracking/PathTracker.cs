using System.Numerics;
using FiberWorkers.Algebra.LinearAlgebra;
using FiberWorkers.Solving.Homotopies;

namespace FiberWorkers.Solving.Tracking;

/// <summary>
/// Predictor–corrector tracking of one solution of H(x, t) = 0 along a straight segment t(τ) = t_a + τ·(t_b − t_a),
/// τ ∈ [0, 1], t complex. Predictor: classical fourth-order Runge–Kutta on dx/dτ = −H_x⁻¹·H_t·(t_b − t_a).
/// Corrector: simplified Newton at the new t with the Jacobian factored for the last Runge–Kutta stage (which
/// sits at the new t, within the predictor's error of the corrected point), so each iteration costs one value
/// evaluation and one solve; its contraction rate must stay below a bound (against path jumping).
/// The step size adapts to the predictor error, estimated by the first Newton correction (local error ∝ h⁵),
/// and to the corrector's contraction. Reuses its buffers; one tracker per thread.
/// </summary>
internal sealed class PathTracker
{
    private readonly IHomotopy _homotopy;
    private readonly int _n;
    private readonly Complex[] _values;
    private readonly Complex[] _jacobian;
    private readonly Complex[] _timeDerivative;
    private readonly Complex[] _k1;
    private readonly Complex[] _k2;
    private readonly Complex[] _k3;
    private readonly Complex[] _k4;
    private readonly Complex[] _stage;
    private readonly Complex[] _predicted;
    private readonly Complex[] _work;
    private readonly Complex[] _unit;
    private readonly int[] _pivots;
    private readonly Complex[] _previous;
    private readonly Complex[] _previousTangent;
    private double _moveNorm;

    // True when _jacobian/_pivots hold factors at the predicted point's t (Runge–Kutta's last stage); the Hermite
    // predictor leaves the corrector to factor the Jacobian at the predicted point itself.
    private bool _factorsAtPrediction;

    public PathTracker(IHomotopy homotopy)
    {
        ArgumentNullException.ThrowIfNull(homotopy);
        _homotopy = homotopy;
        _n = homotopy.Dimension;
        _values = new Complex[_n];
        _jacobian = new Complex[_n * _n];
        _timeDerivative = new Complex[_n];
        _k1 = new Complex[_n];
        _k2 = new Complex[_n];
        _k3 = new Complex[_n];
        _k4 = new Complex[_n];
        _stage = new Complex[_n];
        _predicted = new Complex[_n];
        _work = new Complex[2 * _n];
        _unit = new Complex[_n];
        _pivots = new int[_n];
        _previous = new Complex[_n];
        _previousTangent = new Complex[_n];
    }

    public IHomotopy Homotopy => _homotopy;

    public int Dimension => _n;

    /// <summary>Tracks <paramref name="x"/> (a solution at t_a, updated in place) to t_b.</summary>
    public TrackOutcome Track(Span<Complex> x, Complex tStart, Complex tEnd, TrackerOptions options, int? maxSteps = null)
    {
        var span = tEnd - tStart;
        var budget = maxSteps ?? options.MaxSteps;
        var tau = 0.0;
        var previousTau = double.NaN;
        var stepSize = options.InitialStepSize;
        var steps = 0;
        var rejections = 0;
        var hermite = options.Predictor == Predictor.Hermite;
        if (!Derivative(x, tStart, span, _k1))
        {
            return new TrackOutcome(TrackStatus.SingularJacobian, 0, 0, 0, stepSize);
        }

        if (options.InitialStepFromTangent > 0 && MaxNorm(_k1) is var speed and > 0)
        {
            stepSize = Math.Clamp(options.InitialStepFromTangent * (1 + MaxNorm(x)) / speed, Math.Min(1e-3, stepSize), stepSize);
        }

        while (tau < 1)
        {
            if (steps + rejections >= budget)
            {
                return new TrackOutcome(TrackStatus.TooManySteps, tau, steps, rejections, stepSize);
            }

            var step = Math.Min(stepSize, 1 - tau);
            var last = step >= 1 - tau;
            var newT = last ? tEnd : tStart + ((tau + step) * span);
            var iterations = 0;
            var firstCorrection = 0.0;
            var contraction = 0.0;
            var useHermite = hermite && !double.IsNaN(previousTau);
            var predicted = useHermite ? PredictHermite(x, tau - previousTau, step) : Predict(x, tStart, span, tau, step);
            var accepted = predicted && Correct(newT, options, out iterations, out firstCorrection, out contraction);
            if (!accepted)
            {
                rejections++;
                stepSize = step * 0.5;
                if (stepSize < options.MinStepSize)
                {
                    return new TrackOutcome(TrackStatus.StepSizeUnderflow, tau, steps, rejections, stepSize);
                }

                continue;
            }

            x.CopyTo(_previous);
            _k1.AsSpan().CopyTo(_previousTangent);
            previousTau = tau;
            _predicted.AsSpan().CopyTo(x);
            tau = last ? 1 : tau + step;
            steps++;

            // The tangent at the end would only serve a next step: every caller refines and judges the end itself.
            if (!last && !Derivative(x, newT, span, _k1))
            {
                return new TrackOutcome(TrackStatus.SingularJacobian, tau, steps, rejections, stepSize);
            }

            // Step growth from the predictor error e ≈ C·h^(p+1) (p = 4 for Runge–Kutta, 3 for the Hermite
            // extrapolation): aim for e at the tolerance, never more than ×2 per step; a corrector that needed every
            // iteration or contracted slowly holds the step.
            var scale = 1 + MaxNorm(x);
            var error = firstCorrection / scale;
            var exponent = useHermite ? 0.25 : 0.2;
            var factor = error > 0 ? 0.9 * Math.Pow(options.PredictorTolerance / error, exponent) : 2.0;
            if (iterations >= options.MaxCorrectorIterations || contraction > 0.5 * options.MaxContraction)
            {
                factor = Math.Min(factor, 1.0);
            }

            factor = Math.Clamp(factor, 0.5, 2.0);
            if (!last || factor < 1)
            {
                stepSize = Math.Clamp(step * factor, options.MinStepSize, options.MaxStepSize);
            }
        }

        return new TrackOutcome(TrackStatus.Completed, 1, steps, rejections, stepSize);
    }

    /// <summary>
    /// Cubic Hermite extrapolation: the cubic through (τ₋₁, x₋₁, x′₋₁) and (τ₀, x₀, x′₀), evaluated at τ₀ + h. With
    /// H = τ₀ − τ₋₁ and u = 1 + h/H the basis is h₀₀ = 2u³ − 3u² + 1, h₁₀ = u³ − 2u² + u, h₀₁ = −2u³ + 3u²,
    /// h₁₁ = u³ − u²; the extrapolation error is O(h·H³ + h⁴) times the fourth derivative of the path.
    /// </summary>
    private bool PredictHermite(ReadOnlySpan<Complex> x, double previousStep, double step)
    {
        var u = 1 + (step / previousStep);
        var u2 = u * u;
        var u3 = u2 * u;
        var h00 = (2 * u3) - (3 * u2) + 1;
        var h10 = (u3 - (2 * u2) + u) * previousStep;
        var h01 = (-2 * u3) + (3 * u2);
        var h11 = (u3 - u2) * previousStep;
        for (var i = 0; i < _n; i++)
        {
            _predicted[i] = (h00 * _previous[i]) + (h10 * _previousTangent[i]) + (h01 * x[i]) + (h11 * _k1[i]);
        }

        _moveNorm = MaxDistance(_predicted, x);

        _factorsAtPrediction = false;
        return true;
    }

    /// <summary>
    /// Newton's method on H(·, t) = 0 at fixed t; returns the last step norm (∞ on failure) and leaves the
    /// refined point in <paramref name="x"/>.
    /// </summary>
    public double Refine(Span<Complex> x, Complex t, int maxIterations, double tolerance) =>
        Refine(x, t, maxIterations, tolerance, estimateCondition: false, out _);

    /// <summary>
    /// <see cref="Refine(Span{Complex}, Complex, int, double)"/> that also estimates κ₁(∂H/∂x) from the last
    /// iteration's factors, taken at the point before its (converged, rounding-sized) update: the same figure as
    /// <see cref="Condition"/> at the refined point without another evaluation and factorization. ∞ when a
    /// factorization fails.
    /// </summary>
    public double Refine(Span<Complex> x, Complex t, int maxIterations, double tolerance, out double condition) =>
        Refine(x, t, maxIterations, tolerance, estimateCondition: true, out condition);

    private double Refine(Span<Complex> x, Complex t, int maxIterations, double tolerance, bool estimateCondition, out double condition)
    {
        condition = double.PositiveInfinity;
        var last = double.PositiveInfinity;
        for (var iteration = 0; iteration < maxIterations; iteration++)
        {
            _homotopy.Evaluate(x, t, _values, _jacobian);
            var matrixNorm = estimateCondition ? ComplexLu.OneNorm(_jacobian, _n) : 0;
            if (!ComplexLu.Factor(_jacobian, _n, _pivots) || !double.IsFinite(matrixNorm))
            {
                return double.PositiveInfinity;
            }

            ComplexLu.Solve(_jacobian, _n, _pivots, _values);
            var norm = MaxNorm(_values);
            if (!double.IsFinite(norm))
            {
                return double.PositiveInfinity;
            }

            for (var i = 0; i < _n; i++)
            {
                x[i] -= _values[i];
            }

            last = norm;
            var converged = norm <= tolerance * (1 + MaxNorm(x));
            if (converged || iteration == maxIterations - 1)
            {
                if (estimateCondition)
                {
                    condition = matrixNorm * ComplexLu.EstimateInverseOneNorm(_jacobian, _n, _pivots, _work);
                }

                break;
            }
        }

        return last;
    }

    /// <summary>‖H(x, t)‖∞ from the values alone (no Jacobian).</summary>
    public double ValueNorm(ReadOnlySpan<Complex> x, Complex t)
    {
        _homotopy.Evaluate(x, t, _values);
        return MaxNorm(_values);
    }

    /// <summary>‖H(x, t)‖∞.</summary>
    public double Residual(ReadOnlySpan<Complex> x, Complex t)
    {
        _homotopy.Evaluate(x, t, _values, _jacobian);
        return MaxNorm(_values);
    }

    /// <summary>Estimate of κ₁(∂H/∂x) at (x, t); ∞ when singular.</summary>
    public double Condition(ReadOnlySpan<Complex> x, Complex t)
    {
        _homotopy.Evaluate(x, t, _values, _jacobian);
        var norm = ComplexLu.OneNorm(_jacobian, _n);
        if (!ComplexLu.Factor(_jacobian, _n, _pivots) || !double.IsFinite(norm))
        {
            return double.PositiveInfinity;
        }

        return norm * ComplexLu.EstimateInverseOneNorm(_jacobian, _n, _pivots, _work);
    }

    /// <summary>
    /// Chart-independent estimate of κ₁ for a projective homotopy (the last row of ∂H/∂x is the chart c·X = 1):
    /// the Jacobian of H(·, t) at the unit vector X̂ = X/‖X‖₂, with the chart row replaced by X̂*, the conjugate
    /// of X̂ (the orthogonal chart through the point), every row divided by its largest entry. The chart's own row is
    /// a poor yardstick: with |cᵢ| = 1 a regular solution near the chart's hyperplane c·X = 0 has huge coordinates in
    /// the chart and a condition number that grows with ‖X‖², which would misread it as singular. ∞ when singular.
    /// </summary>
    public double ProjectiveCondition(ReadOnlySpan<Complex> x, Complex t)
    {
        var norm = 0.0;
        foreach (var z in x)
        {
            norm += (z.Real * z.Real) + (z.Imaginary * z.Imaginary);
        }

        norm = Math.Sqrt(norm);
        if (!(norm > 0) || !double.IsFinite(norm))
        {
            return double.PositiveInfinity;
        }

        for (var i = 0; i < _n; i++)
        {
            _unit[i] = x[i] / norm;
        }

        // F^h is homogeneous, so ∂F^h/∂X at X̂ is the Jacobian at X with each row rescaled by a power of ‖X‖.
        _homotopy.Evaluate(_unit, t, _values, _jacobian);
        var chartRow = _jacobian.AsSpan((_n - 1) * _n, _n);
        for (var j = 0; j < _n; j++)
        {
            chartRow[j] = Complex.Conjugate(_unit[j]);
        }

        // Divide every row by its largest entry: scaling an equation changes neither its solutions nor whether they
        // are singular, but equations of different degrees at a point with coordinates of very different sizes would
        // otherwise make a regular solution look singular (cyclic-6 with constant parameters: κ ≈ 8·10¹¹ unscaled,
        // 3·10⁴ scaled, for an orbit of 12 regular solutions with |x| ≈ 60).
        for (var i = 0; i < _n; i++)
        {
            var row = _jacobian.AsSpan(i * _n, _n);
            var largest = MaxNorm(row);

            if (!(largest > 0) || !double.IsFinite(largest))
            {
                return double.PositiveInfinity;
            }

            for (var j = 0; j < _n; j++)
            {
                row[j] /= largest;
            }
        }

        var jacobianNorm = ComplexLu.OneNorm(_jacobian, _n);
        if (!ComplexLu.Factor(_jacobian, _n, _pivots) || !double.IsFinite(jacobianNorm))
        {
            return double.PositiveInfinity;
        }

        return jacobianNorm * ComplexLu.EstimateInverseOneNorm(_jacobian, _n, _pivots, _work);
    }

    private bool Predict(ReadOnlySpan<Complex> x, Complex tStart, Complex span, double tau, double step)
    {
        var half = 0.5 * step;
        var tHalf = tStart + ((tau + half) * span);
        var tFull = tStart + ((tau + step) * span);
        Axpy(x, half, _k1, _stage);
        if (!Derivative(_stage, tHalf, span, _k2))
        {
            return false;
        }

        Axpy(x, half, _k2, _stage);
        if (!Derivative(_stage, tHalf, span, _k3))
        {
            return false;
        }

        Axpy(x, step, _k3, _stage);
        if (!Derivative(_stage, tFull, span, _k4))
        {
            return false;
        }

        var sixth = step / 6.0;
        for (var i = 0; i < _n; i++)
        {
            _predicted[i] = x[i] + (sixth * (_k1[i] + (2 * (_k2[i] + _k3[i])) + _k4[i]));
        }

        // Remember the predicted move for the path-jumping guard in the corrector.
        _factorsAtPrediction = true;
        _moveNorm = MaxDistance(_predicted, x);

        return true;
    }

    /// <summary>Newton on the predicted point at t; false when it does not contract fast enough or stalls.</summary>
    private bool Correct(Complex t, TrackerOptions options, out int iterations, out double firstCorrection, out double contraction)
    {
        iterations = 0;
        firstCorrection = 0;
        contraction = 0;
        var previous = 0.0;
        var point = _predicted.AsSpan();
        for (var k = 0; k < options.MaxCorrectorIterations; k++)
        {
            // Simplified Newton: after Runge–Kutta, _jacobian and _pivots hold the fourth stage's factors at the new t;
            // after the Hermite predictor the first iteration factors the Jacobian at the predicted point.
            if (k == 0 && !_factorsAtPrediction)
            {
                _homotopy.Evaluate(point, t, _values, _jacobian);
                if (!ComplexLu.Factor(_jacobian, _n, _pivots))
                {
                    return false;
                }
            }
            else
            {
                _homotopy.Evaluate(point, t, _values);
            }

            ComplexLu.Solve(_jacobian, _n, _pivots, _values);
            var norm = MaxNorm(_values);
            if (!double.IsFinite(norm))
            {
                return false;
            }

            for (var i = 0; i < _n; i++)
            {
                point[i] -= _values[i];
            }

            iterations = k + 1;
            var scale = 1 + MaxNorm(point);
            if (k == 0)
            {
                firstCorrection = norm;
                if (norm > (options.MaxCorrectionRatio * _moveNorm) + (options.CorrectorTolerance * scale))
                {
                    return false;
                }
            }
            else
            {
                var rate = norm / previous;
                contraction = Math.Max(contraction, rate);
                if (rate > options.MaxContraction && norm > options.CorrectorTolerance * scale)
                {
                    return false;
                }

                // Linear convergence at rate θ leaves an error of about θ/(1 − θ)·‖Δ‖ after this update
                // (Deuflhard's a-posteriori estimate), which is what the tolerance bounds.
                if (rate < 1 && rate / (1 - rate) * norm <= options.CorrectorTolerance * scale)
                {
                    return true;
                }
            }

            if (norm <= options.CorrectorTolerance * scale)
            {
                return true;
            }

            previous = norm;
        }

        return false;
    }

    /// <summary>k = dx/dτ = −H_x⁻¹ · H_t · span at (x, t); false when H_x is singular or values are not finite.</summary>
    private bool Derivative(ReadOnlySpan<Complex> x, Complex t, Complex span, Span<Complex> k)
    {
        _homotopy.Evaluate(x, t, _values, _jacobian, _timeDerivative);
        if (!ComplexLu.Factor(_jacobian, _n, _pivots))
        {
            return false;
        }

        for (var i = 0; i < _n; i++)
        {
            k[i] = -_timeDerivative[i] * span;
        }

        ComplexLu.Solve(_jacobian, _n, _pivots, k);
        for (var i = 0; i < _n; i++)
        {
            if (!double.IsFinite(k[i].Real) || !double.IsFinite(k[i].Imaginary))
            {
                return false;
            }
        }

        return true;
    }

    private void Axpy(ReadOnlySpan<Complex> x, double step, ReadOnlySpan<Complex> direction, Span<Complex> destination)
    {
        for (var i = 0; i < _n; i++)
        {
            destination[i] = x[i] + (step * direction[i]);
        }
    }

    /// <summary>
    /// max |vᵢ|, NaN when any entry is NaN. The largest squared modulus is found first and one square root taken
    /// (Complex.Abs, which guards against overflow with a hypot per entry, took 13 % of a sweep's tile time); only
    /// when a square overflows while the entries are finite (|vᵢ| above 10¹⁵⁴) is the guarded modulus used.
    /// </summary>
    internal static double MaxNorm(ReadOnlySpan<Complex> v)
    {
        var largest = 0.0;
        foreach (var z in v)
        {
            var square = (z.Real * z.Real) + (z.Imaginary * z.Imaginary);
            if (double.IsNaN(square))
            {
                return double.NaN;
            }

            largest = Math.Max(largest, square);
        }

        return double.IsPositiveInfinity(largest) ? GuardedMaxNorm(v) : Math.Sqrt(largest);
    }

    private static double GuardedMaxNorm(ReadOnlySpan<Complex> v)
    {
        var norm = 0.0;
        foreach (var z in v)
        {
            norm = Math.Max(norm, Complex.Abs(z));
        }

        return norm;
    }

    /// <summary>max |aᵢ − bᵢ| (as <see cref="MaxNorm"/>).</summary>
    private static double MaxDistance(ReadOnlySpan<Complex> a, ReadOnlySpan<Complex> b)
    {
        var largest = 0.0;
        for (var i = 0; i < a.Length; i++)
        {
            var (re, im) = (a[i].Real - b[i].Real, a[i].Imaginary - b[i].Imaginary);
            largest = Math.Max(largest, (re * re) + (im * im));
        }

        return double.IsPositiveInfinity(largest) || double.IsNaN(largest) ? GuardedMaxDistance(a, b) : Math.Sqrt(largest);
    }

    private static double GuardedMaxDistance(ReadOnlySpan<Complex> a, ReadOnlySpan<Complex> b)
    {
        var norm = 0.0;
        for (var i = 0; i < a.Length; i++)
        {
            norm = Math.Max(norm, Complex.Abs(a[i] - b[i]));
        }

        return norm;
    }
}

package calib

import (
	"errors"
	"fmt"
	"math"
	"slices"

	"gonum.org/v1/gonum/mat"
)

// Model is the form of a calibration curve, response y against amount x.
type Model string

// Calibration models.
const (
	LinearOrigin Model = "linear-origin" // y = b1·x
	Linear       Model = "linear"        // y = b0 + b1·x
	Quadratic    Model = "quadratic"     // y = b0 + b1·x + b2·x²
)

// Weighting is the weight w_i given to each calibration point in the least
// squares sum Σ w_i (y_i − ŷ_i)².
type Weighting string

// Weightings.
const (
	Unweighted      Weighting = "none" // w = 1
	InverseX        Weighting = "1/x"  // w = 1/x
	InverseXSquared Weighting = "1/x2" // w = 1/x²
)

// Fit is a calibration curve fitted to standards, with its regression
// statistics. Coefficients and standard errors are indexed by the power of
// x they multiply: Coef[0] is the intercept b0, Coef[1] the slope b1 and,
// for a quadratic, Coef[2] is b2. A linear-origin fit has the intercept
// fixed at zero: Coef[0] and SE[0] are 0 and are not parameters (P is 1).
type Fit struct {
	Model     Model
	Weighting Weighting
	Coef      []float64 // b0, b1[, b2]
	SE        []float64 // standard errors of Coef
	// ResidualSD is s = √(Σw(y − ŷ)²/(n − p)), in the units of the
	// weighted residuals (response units only when unweighted).
	ResidualSD float64
	// R2 is the coefficient of determination 1 − SSRes/SSTot. SSTot is
	// centred on the weighted mean response for models with an intercept
	// and uncentred (Σw y²) for linear-origin, the convention of the NIST
	// StRD certificates.
	R2 float64
	// SSRes = Σw(y − ŷ)²; SSReg = Σw(ŷ − ȳ_w)², or Σw ŷ² for linear-origin.
	SSRes, SSReg float64
	// P is the number of fitted parameters, DF = N − P the residual
	// degrees of freedom.
	P, DF int
	// F = (SSReg/(P − 1))/(SSRes/DF), or (SSReg/P)/(SSRes/DF) for
	// linear-origin; +Inf when the curve passes exactly through every point.
	F float64
	N int
	// Residuals are y − ŷ, unweighted, in input order.
	Residuals []float64
	// Accuracy is the back-calculated amount (the response read back
	// through the curve with Amount) over the nominal amount, ×100, for
	// each point in input order. It is NaN where undefined: a nominal
	// amount of 0, or a response the curve cannot be read at.
	Accuracy []float64
	// XMin and XMax bound the calibrated range: the smallest and largest
	// nominal amount.
	XMin, XMax float64
}

// params returns the number of coefficients of a model and whether it has
// an intercept, or an error for an unknown model.
func (m Model) params() (p int, intercept bool, err error) {
	switch m {
	case LinearOrigin:
		return 1, false, nil
	case Linear:
		return 2, true, nil
	case Quadratic:
		return 3, true, nil
	}
	return 0, false, fmt.Errorf("calib: unknown model %q (want %q, %q or %q)", m, LinearOrigin, Linear, Quadratic)
}

// sqrtWeight returns √w for an amount x, or an error.
func (w Weighting) sqrtWeight(x float64) (float64, error) {
	switch w {
	case Unweighted:
		return 1, nil
	case InverseX, InverseXSquared:
		if !(x > 0) {
			return 0, fmt.Errorf("calib: weighting %q needs every amount > 0, got %g", w, x)
		}
		if w == InverseX {
			return 1 / math.Sqrt(x), nil
		}
		return 1 / x, nil
	}
	return 0, fmt.Errorf("calib: unknown weighting %q (want %q, %q or %q)", w, Unweighted, InverseX, InverseXSquared)
}

// FitCurve fits a calibration curve of model m to the amounts x and the
// responses y of calibration standards, by weighted least squares.
//
// The fit is computed by a Householder QR factorisation of the √w-scaled
// design matrix, never by the normal equations, so it keeps its digits on
// ill-conditioned data (wide amount ranges, quadratics).
//
// FitCurve returns an error, saying what is wrong, when x and y differ in
// length or hold a non-finite value, an amount is negative (or not
// positive with 1/x or 1/x² weights), there are too few points (the number
// of coefficients plus one, so that the residual SD is defined) or too few
// distinct amounts (two for linear, three for quadratic, one non-zero for
// linear-origin), all responses are equal, the design is numerically
// singular, or the fitted curve cannot be read backwards over its range:
// its slope is (numerically) zero, or changes sign, somewhere in
// [XMin, XMax].
func FitCurve(x, y []float64, m Model, w Weighting) (*Fit, error) {
	p, intercept, err := m.params()
	if err != nil {
		return nil, err
	}
	if len(x) != len(y) {
		return nil, fmt.Errorf("calib: %d amounts but %d responses", len(x), len(y))
	}
	n := len(x)
	if n < p+1 {
		return nil, fmt.Errorf("calib: model %q needs at least %d calibration points, got %d", m, p+1, n)
	}
	sw := make([]float64, n)
	for i := range n {
		if math.IsNaN(x[i]) || math.IsInf(x[i], 0) || math.IsNaN(y[i]) || math.IsInf(y[i], 0) {
			return nil, fmt.Errorf("calib: point %d (amount %g, response %g) is not finite", i+1, x[i], y[i])
		}
		if x[i] < 0 {
			return nil, fmt.Errorf("calib: point %d has a negative amount %g", i+1, x[i])
		}
		if sw[i], err = w.sqrtWeight(x[i]); err != nil {
			return nil, fmt.Errorf("%w (point %d)", err, i+1)
		}
	}
	levels := slices.Compact(slices.Sorted(slices.Values(x)))
	switch {
	case !intercept && levels[len(levels)-1] == 0:
		return nil, fmt.Errorf("calib: model %q needs a non-zero amount, got only zeros", m)
	case intercept && len(levels) < p:
		return nil, fmt.Errorf("calib: model %q needs at least %d distinct amounts, got %d", m, p, len(levels))
	}

	design := mat.NewDense(n, p, nil)
	for i, xi := range x {
		if intercept {
			design.Set(i, 0, 1)
			design.Set(i, 1, xi)
			if p == 3 {
				design.Set(i, 2, xi*xi)
			}
		} else {
			design.Set(i, 0, xi)
		}
	}
	reg, err := regress(design, y, sw, intercept)
	if err != nil {
		return nil, fmt.Errorf("calib: %s fit: %w", m, err)
	}

	// Coefficients by power of x: linear-origin has b0 fixed at 0.
	fixed := 0
	if !intercept {
		fixed = 1
	}
	f := &Fit{
		Model: m, Weighting: w,
		Coef:       append(make([]float64, fixed), reg.coef...),
		SE:         append(make([]float64, fixed), reg.se...),
		ResidualSD: reg.s, R2: reg.r2, SSRes: reg.ssRes, SSReg: reg.ssReg,
		P: p, DF: reg.df, F: reg.f, N: n,
		Residuals: make([]float64, n), Accuracy: make([]float64, n),
		XMin: levels[0], XMax: levels[len(levels)-1],
	}

	// The curve must be monotonic over the range, and not numerically flat:
	// the response change its slope implies across [0, XMax] must exceed
	// 1e-12 of the largest response.
	lo, hi := f.derivative(f.XMin), f.derivative(f.XMax)
	yMax := 0.0
	for _, v := range y {
		yMax = max(yMax, math.Abs(v))
	}
	flat := 1e-12 * yMax / f.XMax
	if !(lo*hi > 0) || math.Abs(lo) <= flat || math.Abs(hi) <= flat {
		return nil, fmt.Errorf("calib: the fitted %s curve is flat or turns within the calibrated range (slope %.6g at %g, %.6g at %g): amounts cannot be read from it", m, lo, f.XMin, hi, f.XMax)
	}
	for i := range n {
		f.Residuals[i] = y[i] - reg.fit[i]
		f.Accuracy[i] = math.NaN()
		if amt, _, err := f.Amount(y[i]); err == nil && x[i] != 0 {
			f.Accuracy[i] = 100 * amt / x[i]
		}
	}
	return f, nil
}

// Predict returns the response the curve gives for amount x.
func (f *Fit) Predict(x float64) float64 {
	y := 0.0
	for _, c := range slices.Backward(f.Coef) {
		y = y*x + c
	}
	return y
}

// derivative returns dy/dx of the curve at x.
func (f *Fit) derivative(x float64) float64 {
	d := 0.0
	for k := len(f.Coef) - 1; k >= 1; k-- {
		d = d*x + float64(k)*f.Coef[k]
	}
	return d
}

// rangeSlack is the relative margin, of the range width, by which an amount
// may pass a range end and still count as in range: rounding noise from
// reading a standard at the end of the range back through the curve.
const rangeSlack = 1e-9

// ErrNoAmount reports a response that the curve cannot be read at.
var ErrNoAmount = errors.New("calib: no amount for this response")

// Amount reads the curve backwards: the amount x whose predicted response
// is the given response. inRange is false when x lies outside the
// calibrated range [XMin, XMax] (widened by 1e-9 of its width for
// rounding); the amount is then an extrapolation, returned for the caller
// to report or reject, never silently accepted.
//
// A quadratic has two roots. Amount returns the one on the calibrated
// branch, the side of the curve's turning point that holds the calibrated
// range (FitCurve guarantees the turning point lies outside it), computed
// without cancellation. A response beyond the curve's extreme value has no
// amount on that branch: the error wraps ErrNoAmount, as it does for a
// non-finite response or a result out of floating-point range.
func (f *Fit) Amount(response float64) (x float64, inRange bool, err error) {
	if math.IsNaN(response) || math.IsInf(response, 0) {
		return 0, false, fmt.Errorf("%w: response %g is not finite", ErrNoAmount, response)
	}
	if len(f.Coef) < 2 {
		return 0, false, fmt.Errorf("%w: the curve has no slope", ErrNoAmount)
	}
	b0, b1 := f.Coef[0], f.Coef[1]
	b2 := 0.0
	if len(f.Coef) > 2 {
		b2 = f.Coef[2]
	}
	c := b0 - response
	switch {
	case b2 == 0:
		x = -c / b1
	default:
		// Roots of b2·x² + b1·x + c: the one with sign(b1 + 2·b2·x) equal
		// to the sign s of the slope over the calibrated range, that is
		// x = (−b1 + s·√D)/(2·b2), D = b1² − 4·b2·c.
		s := math.Copysign(1, f.derivative((f.XMin+f.XMax)/2))
		d := b1*b1 - 4*b2*c
		if d < 0 {
			v := -b1 / (2 * b2)
			return 0, false, fmt.Errorf("%w: response %g lies beyond the curve's extreme response %g (at amount %g)", ErrNoAmount, response, f.Predict(v), v)
		}
		if b1*s > 0 {
			x = -2 * c / (b1 + s*math.Sqrt(d)) // conjugate form: no cancellation
		} else {
			x = (-b1 + s*math.Sqrt(d)) / (2 * b2)
		}
	}
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0, false, fmt.Errorf("%w: response %g gives an amount out of floating-point range", ErrNoAmount, response)
	}
	slack := rangeSlack * (f.XMax - f.XMin)
	return x, x >= f.XMin-slack && x <= f.XMax+slack, nil
}

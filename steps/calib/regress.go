package calib

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/mat"
)

// maxCond is the largest condition number of the column-scaled, weighted
// design accepted: beyond it fewer than about four significant digits of
// the coefficients would survive double-precision arithmetic (1/(1e4·ε)).
const maxCond = 1 / (1e4 * 0x1p-52)

// errSingular reports a design whose columns are (numerically) dependent.
var errSingular = errors.New("the design is numerically singular")

// regression is a weighted linear least-squares solution and its analysis
// of variance.
type regression struct {
	coef  []float64 // one per design column
	cov   []float64 // (XᵀWX)⁻¹, p×p row-major; multiply by s² for the covariance
	se    []float64 // standard errors of coef
	fit   []float64 // fitted values Xβ
	s     float64   // residual SD √(Σw r²/(n−p))
	ssRes float64   // Σw r²
	ssReg float64   // Σw (ŷ − ȳ_w)² with an intercept, Σw ŷ² without
	r2    float64   // 1 − SSres/SStot, SStot centred on ȳ_w with an intercept, Σw y² without
	f     float64   // (SSreg/df_reg)/(SSres/df); +Inf for an exact fit
	df    int       // n − p
}

// regress fits y ≈ Xβ by minimising Σ w_i (y_i − x_iᵀβ)², where w_i = sw_i²
// (sw nil means all weights 1). intercept says that column 0 of x is the
// constant column; it selects the centred sums of squares.
//
// Method: every weight and every column of the weighted design, and the
// response, are scaled by powers of two (exact in binary barring
// underflow, so this is pure equilibration without rounding), the scaled
// design is factorised by Householder QR and β solves Rβ = Qᵀb. The
// unscaled covariance is R⁻¹R⁻ᵀ. Residuals and sums of squares are formed
// from the original data. Scaling all weights by one constant changes
// nothing but s (which scales with it), as weighted least squares requires.
func regress(x *mat.Dense, y, sw []float64, intercept bool) (*regression, error) {
	n, p := x.Dims()
	if len(y) != n || (sw != nil && len(sw) != n) {
		return nil, fmt.Errorf("%d responses and %d weights for %d design rows", len(y), len(sw), n)
	}
	if n <= p {
		return nil, fmt.Errorf("%d points for %d coefficients: at least %d are needed", n, p, p+1)
	}
	for i := range n {
		for j := range p {
			if v := x.At(i, j); math.IsNaN(v) || math.IsInf(v, 0) {
				return nil, errors.New("the design matrix overflows floating-point range: rescale the amounts")
			}
		}
	}
	// Scale the weights so that the largest √w lies in [0.5, 1): w' = w·4^-kw.
	sws := make([]float64, n)
	big := 0.0
	for i := range sws {
		sws[i] = 1
		if sw != nil {
			sws[i] = sw[i]
		}
		big = max(big, math.Abs(sws[i]))
	}
	kw := pow2Exponent(big)
	for i := range sws {
		sws[i] = math.Ldexp(sws[i], -kw)
	}

	a := mat.NewDense(n, p, nil)
	colExp := make([]int, p)
	for j := range p {
		big = 0
		for i := range n {
			big = max(big, math.Abs(sws[i]*x.At(i, j)))
		}
		colExp[j] = pow2Exponent(big)
		for i := range n {
			a.Set(i, j, math.Ldexp(sws[i]*x.At(i, j), -colExp[j]))
		}
	}
	big = 0
	for i := range n {
		big = max(big, math.Abs(sws[i]*y[i]))
	}
	ky := pow2Exponent(big)
	b := mat.NewVecDense(n, nil)
	for i := range n {
		b.SetVec(i, math.Ldexp(sws[i]*y[i], -ky))
	}

	var qr mat.QR
	qr.Factorize(a)
	if c := qr.Cond(); !(c <= maxCond) {
		return nil, fmt.Errorf("%w (condition number %.3g)", errSingular, c)
	}
	var beta mat.VecDense
	if err := qr.SolveVecTo(&beta, false, b); err != nil {
		return nil, fmt.Errorf("%w: %v", errSingular, err)
	}
	var rFull mat.Dense
	qr.RTo(&rFull)
	r := mat.NewTriDense(p, mat.Upper, nil)
	for i := range p {
		for j := i; j < p; j++ {
			r.SetTri(i, j, rFull.At(i, j))
		}
	}
	var rInv mat.TriDense
	if err := rInv.InverseTri(r); err != nil {
		return nil, fmt.Errorf("%w: %v", errSingular, err)
	}

	reg := &regression{
		coef: make([]float64, p),
		cov:  make([]float64, p*p),
		se:   make([]float64, p),
		fit:  make([]float64, n),
		df:   n - p,
	}
	// β_j = β'_j·2^(ky − colExp_j); with the scaled weights,
	// (XᵀW'X)⁻¹_jk = (R⁻¹R⁻ᵀ)_jk·2^(−colExp_j − colExp_k).
	for j := range p {
		reg.coef[j] = math.Ldexp(beta.AtVec(j), ky-colExp[j])
		for k := range p {
			s := 0.0
			for m := max(j, k); m < p; m++ {
				s += rInv.At(j, m) * rInv.At(k, m)
			}
			reg.cov[j*p+k] = math.Ldexp(s, -colExp[j]-colExp[k])
		}
	}

	// Sums of squares with the scaled weights w' (w = w'·4^kw).
	sumW, sumWY := 0.0, 0.0
	for i := range n {
		yhat := 0.0
		for j := range p {
			yhat += x.At(i, j) * reg.coef[j]
		}
		reg.fit[i] = yhat
		w := sws[i] * sws[i]
		sumW += w
		sumWY += w * y[i]
		r := sws[i] * (y[i] - yhat)
		reg.ssRes += r * r
	}
	ssTot := 0.0
	mean := 0.0
	if intercept {
		mean = sumWY / sumW
	}
	for i := range n {
		w := sws[i] * sws[i]
		ssTot += w * (y[i] - mean) * (y[i] - mean)
		reg.ssReg += w * (reg.fit[i] - mean) * (reg.fit[i] - mean)
	}
	if ssTot == 0 {
		return nil, errors.New("all responses are equal (zero for a fit without intercept): nothing to regress")
	}
	reg.r2 = 1 - reg.ssRes/ssTot
	dfReg := p
	if intercept {
		dfReg--
	}
	s2 := reg.ssRes / float64(reg.df)
	reg.f = (reg.ssReg / float64(dfReg)) / s2
	// The standard errors do not depend on the scale of the weights; s,
	// the sums of squares and (XᵀWX)⁻¹ go back to the caller's weights
	// (w = 4^kw·w').
	for j := range p {
		reg.se[j] = math.Sqrt(s2 * reg.cov[j*p+j])
	}
	for j := range reg.cov {
		reg.cov[j] = math.Ldexp(reg.cov[j], -2*kw)
	}
	reg.s = math.Ldexp(math.Sqrt(s2), kw)
	reg.ssRes = math.Ldexp(reg.ssRes, 2*kw)
	reg.ssReg = math.Ldexp(reg.ssReg, 2*kw)

	for _, v := range [][]float64{reg.coef, reg.se, reg.fit, {reg.s, reg.ssRes, reg.ssReg, reg.r2}} {
		for _, e := range v {
			if math.IsNaN(e) || math.IsInf(e, 0) {
				return nil, errors.New("the fit overflowed floating-point range: rescale the amounts or responses")
			}
		}
	}
	if math.IsNaN(reg.f) {
		return nil, errors.New("the F statistic is undefined")
	}
	return reg, nil
}

// pow2Exponent returns the binary exponent e of m = m'·2^e, m' in [0.5, 1);
// 0 for zero or non-finite m (left for the finiteness checks).
func pow2Exponent(m float64) int {
	if m == 0 || math.IsInf(m, 0) || math.IsNaN(m) {
		return 0
	}
	_, e := math.Frexp(m)
	return e
}

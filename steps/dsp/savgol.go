package dsp

import (
	"fmt"
	"math"
)

// MaxSGOrder is the highest polynomial order SGCoefficients and
// SavitzkyGolay accept.
const MaxSGOrder = 10

// SGCoefficients returns the centred Savitzky–Golay convolution weights
// c[0..window−1] for offsets i = −m…m (m = (window−1)/2): the value at the
// centre of the least-squares polynomial of the given order fitted to
// window equally spaced points at unit spacing, or its derivative of order
// deriv (deriv = 0 smooths). The filtered value is Σ c[i+m]·y[j+i], and
// derivative weights include the factor deriv!, so they give d^k y/dx^k
// directly; divide by h^deriv for sample spacing h.
//
// The weights are computed by least squares (a QR factorisation of the
// Vandermonde matrix in the scaled abscissa i/m), not taken from a table.
// window must be odd and at least 3, order in 0…min(window−1, MaxSGOrder),
// deriv in 0…order.
func SGCoefficients(window, order, deriv int) ([]float64, error) {
	if err := checkSG(window, order, deriv); err != nil {
		return nil, err
	}
	f := newSGFit(window, order)
	c := make([]float64, window)
	f.weights(c, 0, deriv)
	return c, nil
}

// SavitzkyGolay returns the Savitzky–Golay filtered series of y: the
// smoothed values (deriv = 0) or the derivative of order deriv with respect
// to the abscissa, for sample spacing h > 0. The result is a new slice.
//
// Interior points are a convolution with SGCoefficients(window, order,
// deriv). For the first and last m = (window−1)/2 points the polynomial is
// fitted to the first (last) window points and evaluated, or
// differentiated, at each of those points: there is no padding or
// mirroring, and a polynomial of degree ≤ order is returned exactly
// everywhere. The cost is O(len(y)·window).
func SavitzkyGolay(y []float64, window, order, deriv int, h float64) ([]float64, error) {
	if err := checkSG(window, order, deriv); err != nil {
		return nil, err
	}
	if !(h > 0) || math.IsInf(h, 0) {
		return nil, fmt.Errorf("savitzky-golay: sample spacing must be positive and finite, got %g", h)
	}
	n := len(y)
	if n < window {
		return nil, fmt.Errorf("savitzky-golay: window of %d points is wider than the trace of %d points", window, n)
	}
	m := window / 2
	f := newSGFit(window, order)
	scale := 1 / math.Pow(h, float64(deriv))

	c := make([]float64, window)
	f.weights(c, 0, deriv)
	for i := range c {
		c[i] *= scale
	}
	// Interior: out[j] = Σ c_i·y[j−m+i], accumulated one weight at a time
	// over the whole interior, so that successive points do not wait on one
	// another's sums.
	out := make([]float64, n)
	inner := out[m : n-m]
	for i, ci := range c {
		src := y[i : i+len(inner)]
		for j, v := range src {
			inner[j] += ci * v
		}
	}

	// Edge rows: point p (p < m) sits at offset p−m from the centre of the
	// first window, point n−1−p at offset m−p from the centre of the last.
	head, tail := y[:window], y[n-window:]
	for p := 0; p < m; p++ {
		f.weights(c, p-m, deriv)
		var s float64
		for i, ci := range c {
			s += ci * head[i]
		}
		out[p] = s * scale
		f.weights(c, m-p, deriv)
		s = 0
		for i, ci := range c {
			s += ci * tail[i]
		}
		out[n-1-p] = s * scale
	}
	return out, nil
}

func checkSG(window, order, deriv int) error {
	switch {
	case window < 3 || window%2 == 0:
		return fmt.Errorf("savitzky-golay: window must be an odd number of points ≥ 3, got %d", window)
	case order < 0 || order >= window:
		return fmt.Errorf("savitzky-golay: polynomial order must be between 0 and window−1 = %d, got %d", window-1, order)
	case order > MaxSGOrder:
		return fmt.Errorf("savitzky-golay: polynomial order %d is above the supported maximum of %d", order, MaxSGOrder)
	case deriv < 0 || deriv > order:
		return fmt.Errorf("savitzky-golay: derivative order must be between 0 and the polynomial order %d, got %d", order, deriv)
	}
	return nil
}

// sgFit is the thin QR factorisation V = Q·R of the window×(order+1)
// Vandermonde matrix V[i][j] = x_i^j with x_i = (i−m)/m ∈ [−1, 1].
//
// The least-squares polynomial value (or derivative) at abscissa s is
// aᵀR⁻¹Qᵀy where a holds the derivatives of the monomials at s, so the
// weight vector is Q·R⁻ᵀa: one triangular solve and one product per point.
type sgFit struct {
	m    int
	q    [][]float64 // q[j] is column j of Q, length window
	r    [][]float64 // r[k][j], upper triangular, (order+1)²
	work []float64
}

func newSGFit(window, order int) *sgFit {
	m := window / 2
	p := order + 1
	f := &sgFit{m: m, q: make([][]float64, p), r: make([][]float64, p), work: make([]float64, p)}
	for j := range p {
		f.r[j] = make([]float64, p)
		col := make([]float64, window)
		for i := range col {
			col[i] = math.Pow(float64(i-m)/float64(m), float64(j))
		}
		// Gram–Schmidt with a second orthogonalisation pass, which keeps Q
		// orthogonal to working precision for these small, well-scaled
		// matrices.
		for range 2 {
			for k := range j {
				var d float64
				for i, qk := range f.q[k] {
					d += qk * col[i]
				}
				f.r[k][j] += d
				for i, qk := range f.q[k] {
					col[i] -= d * qk
				}
			}
		}
		var norm float64
		for _, v := range col {
			norm += v * v
		}
		norm = math.Sqrt(norm)
		f.r[j][j] = norm
		for i := range col {
			col[i] /= norm
		}
		f.q[j] = col
	}
	return f
}

// weights fills c with the weights that give the deriv-th derivative (per
// unit sample spacing) of the fitted polynomial at offset off ∈ [−m, m]
// samples from the window centre.
func (f *sgFit) weights(c []float64, off, deriv int) {
	s := float64(off) / float64(f.m)
	p := len(f.q)
	// a_j = d^k/dx^k x^j at s, with x = i/m, so d/di = (1/m)·d/dx.
	a := f.work
	for j := range p {
		if j < deriv {
			a[j] = 0
			continue
		}
		v := 1.0
		for t := j - deriv + 1; t <= j; t++ {
			v *= float64(t)
		}
		a[j] = v * math.Pow(s, float64(j-deriv))
	}
	// Solve Rᵀb = a in place (forward substitution).
	for j := range p {
		v := a[j]
		for k := range j {
			v -= f.r[k][j] * a[k]
		}
		a[j] = v / f.r[j][j]
	}
	unit := math.Pow(float64(f.m), -float64(deriv))
	for i := range c {
		var v float64
		for j := range p {
			v += f.q[j][i] * a[j]
		}
		c[i] = v * unit
	}
}

// MovingAverage returns the centred moving average of y over an odd window
// of at least 3 points, as a new slice. Point j averages y[j−k…j+k] with
// k = min((window−1)/2, j, len(y)−1−j): the window shrinks symmetrically at
// the edges (the first and last points are returned unchanged). The
// interior uses a running sum with compensated (Neumaier) summation, so
// rounding error does not accumulate over long traces; the cost is
// O(len(y)).
func MovingAverage(y []float64, window int) ([]float64, error) {
	if window < 3 || window%2 == 0 {
		return nil, fmt.Errorf("moving average: window must be an odd number of points ≥ 3, got %d", window)
	}
	n := len(y)
	if n < window {
		return nil, fmt.Errorf("moving average: window of %d points is wider than the trace of %d points", window, n)
	}
	m := window / 2
	out := make([]float64, n)
	for j := range m {
		var s, t float64
		for i := 0; i <= 2*j; i++ {
			s += y[i]
			t += y[n-1-i]
		}
		out[j] = s / float64(2*j+1)
		out[n-1-j] = t / float64(2*j+1)
	}
	var acc neumaier
	for _, v := range y[:window] {
		acc.add(v)
	}
	inv := 1 / float64(window)
	out[m] = acc.sum() * inv
	for j := m + 1; j < n-m; j++ {
		acc.add(y[j+m])
		acc.add(-y[j-m-1])
		out[j] = acc.sum() * inv
	}
	return out, nil
}

// neumaier is a compensated running sum: the rounding error of every
// addition, found exactly by Knuth's branch-free TwoSum, is accumulated
// separately (the Kahan–Babuška–Neumaier scheme).
type neumaier struct{ s, c float64 }

func (a *neumaier) add(v float64) {
	t := a.s + v
	bp := t - a.s
	a.c += (a.s - (t - bp)) + (v - bp)
	a.s = t
}

func (a *neumaier) sum() float64 { return a.s + a.c }

package dsp

import (
	"math"
	"strings"
	"testing"
)

// sgTable is one row of a published coefficient table: integer weights
// over a common norm.
type sgTable struct {
	window, order, deriv int
	norm                 float64
	coef                 []float64
}

// All rows: check-values.md §1. The 5–11 point quadratic smoothing rows are
// [S] (chemgapedia table; the 5-point row also in the handwiki article); the
// quartic smoothing and all derivative rows are [D] (exact least squares).
// Order 2 and 3 (and 4 and 5) share the centred smoothing weights, as do
// orders 1/2 and 3/4 for the first derivative and 2/3 for the second, so
// each table is checked at both orders.
var sgTables = []sgTable{
	{5, 2, 0, 35, []float64{-3, 12, 17, 12, -3}},
	{7, 2, 0, 21, []float64{-2, 3, 6, 7, 6, 3, -2}},
	{9, 2, 0, 231, []float64{-21, 14, 39, 54, 59, 54, 39, 14, -21}},
	{11, 2, 0, 429, []float64{-36, 9, 44, 69, 84, 89, 84, 69, 44, 9, -36}},
	{7, 4, 0, 231, []float64{5, -30, 75, 131, 75, -30, 5}},
	{9, 4, 0, 429, []float64{15, -55, 30, 135, 179, 135, 30, -55, 15}},
	{11, 4, 0, 429, []float64{18, -45, -10, 60, 120, 143, 120, 60, -10, -45, 18}},
	{5, 1, 1, 10, []float64{-2, -1, 0, 1, 2}},
	{7, 1, 1, 28, []float64{-3, -2, -1, 0, 1, 2, 3}},
	{9, 1, 1, 60, []float64{-4, -3, -2, -1, 0, 1, 2, 3, 4}},
	{11, 1, 1, 110, []float64{-5, -4, -3, -2, -1, 0, 1, 2, 3, 4, 5}},
	{5, 3, 1, 12, []float64{1, -8, 0, 8, -1}},
	{7, 3, 1, 252, []float64{22, -67, -58, 0, 58, 67, -22}},
	{9, 3, 1, 1188, []float64{86, -142, -193, -126, 0, 126, 193, 142, -86}},
	{11, 3, 1, 5148, []float64{300, -294, -532, -503, -296, 0, 296, 503, 532, 294, -300}},
	{5, 2, 2, 7, []float64{2, -1, -2, -1, 2}},
	{7, 2, 2, 42, []float64{5, 0, -3, -4, -3, 0, 5}},
	{9, 2, 2, 462, []float64{28, 7, -8, -17, -20, -17, -8, 7, 28}},
	{11, 2, 2, 429, []float64{15, 6, -1, -6, -9, -10, -9, -6, -1, 6, 15}},
}

func TestSGCoefficientsTables(t *testing.T) {
	for _, tb := range sgTables {
		// The fit of order+1 gives the same centred weights (check-values.md §1
		// table titles, e.g. "quadratic = cubic").
		for _, order := range []int{tb.order, tb.order + 1} {
			c, err := SGCoefficients(tb.window, order, tb.deriv)
			if err != nil {
				t.Fatalf("SGCoefficients(%d,%d,%d): %v", tb.window, order, tb.deriv, err)
			}
			for i, want := range tb.coef {
				if d := math.Abs(c[i] - want/tb.norm); d > 1e-13 {
					t.Errorf("SGCoefficients(%d,%d,%d)[%d] = %.16g, want %g/%g", tb.window, order, tb.deriv, i, c[i], want, tb.norm)
				}
			}
		}
	}
}

func TestSGCoefficientsMoments(t *testing.T) {
	// A least-squares fit of order ≥ j reproduces x^j, so the weights obey
	// Σ c_i·i^j = d^k/dx^k x^j at 0 = k!·[j = k] for j ≤ order (common
	// practice). j = 0, k = 0: the smoothing weights sum to 1.
	for window := 3; window <= 101; window += 2 {
		for order := 0; order <= min(window-1, 6); order++ {
			for deriv := 0; deriv <= order; deriv++ {
				c, err := SGCoefficients(window, order, deriv)
				if err != nil {
					t.Fatal(err)
				}
				m := window / 2
				for j := 0; j <= order; j++ {
					var s, scale float64
					for i, ci := range c {
						v := ci * math.Pow(float64(i-m), float64(j))
						s += v
						scale += math.Abs(v)
					}
					want := 0.0
					if j == deriv {
						want = math.Gamma(float64(deriv) + 1)
					}
					if math.Abs(s-want) > 1e-12*math.Max(scale, 1) {
						t.Errorf("window %d order %d deriv %d: Σc·i^%d = %.15g, want %g", window, order, deriv, j, s, want)
					}
				}
			}
		}
	}
}

func TestSGImpulseResponse(t *testing.T) {
	// check-values.md §1 unit-test values [D]: a unit impulse at the centre
	// returns the coefficients, reversed for the antisymmetric derivative
	// filters.
	for _, tb := range sgTables {
		n := 3 * tb.window
		y := make([]float64, n)
		y[n/2] = 1
		out, err := SavitzkyGolay(y, tb.window, tb.order, tb.deriv, 1)
		if err != nil {
			t.Fatal(err)
		}
		m := tb.window / 2
		for i, want := range tb.coef {
			if tb.deriv%2 == 1 {
				want = -want
			}
			if d := math.Abs(out[n/2-m+i] - want/tb.norm); d > 1e-13 {
				t.Errorf("window %d order %d deriv %d: impulse response[%d] = %.16g, want %g/%g", tb.window, tb.order, tb.deriv, i, out[n/2-m+i], want, tb.norm)
			}
		}
	}
}

// poly evaluates Σ a_j x^j and its k-th derivative.
func poly(a []float64, x float64, k int) float64 {
	var s float64
	for j := len(a) - 1; j >= k; j-- {
		f := 1.0
		for t := j - k + 1; t <= j; t++ {
			f *= float64(t)
		}
		s = s*x + a[j]*f
	}
	return s
}

func TestSGPolynomialPreservation(t *testing.T) {
	// check-values.md §1 [D]: a polynomial of degree ≤ order is returned
	// exactly; here at every point including the edges, where the fitted
	// polynomial is the data's own. Derivatives are exact too (common
	// practice).
	coef := []float64{0.7, -1.3, 0.45, 0.2, -0.06, 0.011, -0.0009, 0.00004}
	const h = 0.05
	for _, window := range []int{3, 5, 7, 9, 11, 21, 51, 101} {
		for order := 0; order <= min(window-1, 6); order++ {
			a := coef[:order+1]
			n := window + 37
			x := func(i int) float64 { return (float64(i) - float64(n)/3) * h }
			y := make([]float64, n)
			for i := range y {
				y[i] = poly(a, x(i), 0)
			}
			for deriv := 0; deriv <= order; deriv++ {
				out, err := SavitzkyGolay(y, window, order, deriv, h)
				if err != nil {
					t.Fatal(err)
				}
				// Rounding in y is amplified by Σ|c|/h^deriv (the filter's
				// condition), large for high derivatives at small h.
				var scale, ymax, amp float64
				for i := range out {
					scale = math.Max(scale, math.Abs(poly(a, x(i), deriv)))
					ymax = math.Max(ymax, math.Abs(y[i]))
				}
				f := newSGFit(window, order)
				c := make([]float64, window)
				for off := -window / 2; off <= window/2; off++ {
					f.weights(c, off, deriv)
					var s float64
					for _, v := range c {
						s += math.Abs(v)
					}
					amp = math.Max(amp, s)
				}
				tol := 1e-12*scale + 64*0x1p-52*ymax*amp/math.Pow(h, float64(deriv))
				for i := range out {
					want := poly(a, x(i), deriv)
					if d := math.Abs(out[i] - want); d > tol {
						t.Errorf("window %d order %d deriv %d: point %d = %.15g, want %.15g", window, order, deriv, i, out[i], want)
						break
					}
				}
			}
		}
	}
}

func TestSGQuarticAndDerivativeChecks(t *testing.T) {
	// check-values.md §1 unit-test values [D], each on x = −m…m evaluated at
	// the centre point of a trace exactly one window long.
	cube := func(x float64) float64 { return x * x * x }
	cases := []struct {
		name                 string
		f                    func(float64) float64
		window, order, deriv int
		want                 float64
	}{
		{"x⁴, 5-point quadratic smoother", func(x float64) float64 { return x * x * x * x }, 5, 2, 0, -72.0 / 35},
		{"x³, 5-point quadratic first derivative", cube, 5, 2, 1, 17.0 / 5},
		{"x³, 5-point cubic first derivative", cube, 5, 3, 1, 0},
		{"x³, 7-point cubic first derivative", cube, 7, 3, 1, 0},
		{"x²+3x, 5-point first derivative", func(x float64) float64 { return x*x + 3*x }, 5, 2, 1, 3},
		{"x², 5-point second derivative", func(x float64) float64 { return x * x }, 5, 2, 2, 2},
		// Quadratic and cubic fits: any cubic is preserved at the centre.
		{"x³, 7-point quadratic smoother", cube, 7, 2, 0, 0},
	}
	for _, c := range cases {
		m := c.window / 2
		y := make([]float64, c.window)
		for i := range y {
			y[i] = c.f(float64(i - m))
		}
		out, err := SavitzkyGolay(y, c.window, c.order, c.deriv, 1)
		if err != nil {
			t.Fatal(err)
		}
		if d := math.Abs(out[m] - c.want); d > 1e-12 {
			t.Errorf("%s: %.15g, want %.15g", c.name, out[m], c.want)
		}
	}
}

func TestSGWhiteNoiseVarianceRatio(t *testing.T) {
	// check-values.md §1 [D]: Σc² = c₀ for quadratic smoothing:
	// 17/35, 1/3, 59/231, 89/429.
	for _, c := range []struct {
		window int
		want   float64
	}{{5, 17.0 / 35}, {7, 1.0 / 3}, {9, 59.0 / 231}, {11, 89.0 / 429}} {
		w, err := SGCoefficients(c.window, 2, 0)
		if err != nil {
			t.Fatal(err)
		}
		var ss float64
		for _, v := range w {
			ss += v * v
		}
		if math.Abs(ss-c.want) > 1e-14 || math.Abs(w[c.window/2]-c.want) > 1e-14 {
			t.Errorf("window %d: Σc² = %.16g, c₀ = %.16g, want %.16g", c.window, ss, w[c.window/2], c.want)
		}
	}
}

func TestSGGaussianApexAttenuation(t *testing.T) {
	// check-values.md §1 [D]: apex of a unit Gaussian (unit spacing) after
	// 5- and 7-point quadratic smoothing, tolerance 1e-7.
	for _, c := range []struct {
		sigma, five, seven float64
	}{
		{1, 0.8784207, 0.7164735},
		{2, 0.9868783, 0.9490732},
		{3, 0.9971029, 0.9871341},
	} {
		y := make([]float64, 61)
		for i := range y {
			y[i] = Gaussian(float64(i), 1, 30, c.sigma)
		}
		for _, wc := range []struct {
			window int
			want   float64
		}{{5, c.five}, {7, c.seven}} {
			out, err := SavitzkyGolay(y, wc.window, 2, 0, 1)
			if err != nil {
				t.Fatal(err)
			}
			if math.Abs(out[30]-wc.want) > 1e-7 {
				t.Errorf("σ = %g, %d points: apex %.8f, want %.7f", c.sigma, wc.window, out[30], wc.want)
			}
		}
	}
}

func TestSGDerivativeSpacing(t *testing.T) {
	// d/dt sin(t) = cos(t) and d²/dt² = −sin(t) (calculus) at spacing
	// h = 0.01: this checks the division by h^deriv, which a wrong power
	// would miss by a factor of 100 or more. The bounds are a few times the
	// truncation error of a 9-point quartic fit (largest at the edges, where
	// the point is off-centre in its window: about 3e-8 and 7e-6 here).
	const h = 0.01
	y := make([]float64, 400)
	for i := range y {
		y[i] = math.Sin(float64(i) * h)
	}
	d1, err := SavitzkyGolay(y, 9, 4, 1, h)
	if err != nil {
		t.Fatal(err)
	}
	d2, err := SavitzkyGolay(y, 9, 4, 2, h)
	if err != nil {
		t.Fatal(err)
	}
	for i := range y {
		x := float64(i) * h
		if math.Abs(d1[i]-math.Cos(x)) > 1e-7 || math.Abs(d2[i]+math.Sin(x)) > 1e-4 {
			t.Fatalf("t = %g: d1 %.10g (want %.10g), d2 %.10g (want %.10g)", x, d1[i], math.Cos(x), d2[i], -math.Sin(x))
		}
	}
}

func TestSGErrors(t *testing.T) {
	y := make([]float64, 5)
	for _, c := range []struct {
		window, order, deriv int
		h                    float64
		msg                  string
	}{
		{9, 2, 0, 1, "window of 9 points is wider than the trace of 5 points"},
		{4, 2, 0, 1, "odd number of points"},
		{1, 0, 0, 1, "odd number of points"},
		{5, 5, 0, 1, "between 0 and window−1 = 4, got 5"},
		{5, -1, 0, 1, "between 0 and window−1"},
		{5, 2, 3, 1, "derivative order must be between 0 and the polynomial order 2, got 3"},
		{5, 2, 0, 0, "sample spacing must be positive"},
		{5, 2, 0, math.Inf(1), "sample spacing must be positive"},
	} {
		_, err := SavitzkyGolay(y, c.window, c.order, c.deriv, c.h)
		if err == nil || !strings.Contains(err.Error(), c.msg) {
			t.Errorf("SavitzkyGolay(window %d, order %d, deriv %d, h %g): error %v, want it to mention %q", c.window, c.order, c.deriv, c.h, err, c.msg)
		}
	}
	if _, err := SGCoefficients(31, 12, 0); err == nil || !strings.Contains(err.Error(), "above the supported maximum") {
		t.Errorf("order 12: error %v", err)
	}
	if _, err := MovingAverage(y, 7); err == nil || !strings.Contains(err.Error(), "window of 7 points is wider than the trace of 5 points") {
		t.Errorf("MovingAverage: error %v", err)
	}
	if _, err := MovingAverage(y, 2); err == nil || !strings.Contains(err.Error(), "odd number") {
		t.Errorf("MovingAverage: error %v", err)
	}
}

func TestMovingAverage(t *testing.T) {
	// Definition of the centred mean with a symmetric window shrinking at the
	// edges, computed directly (common practice).
	y := make([]float64, 200)
	rng := newRNGSplitMix(7)
	for i := range y {
		y[i] = 1e3*math.Sin(float64(i)/9) + rng.normal()
	}
	for _, window := range []int{3, 5, 11, 51} {
		out, err := MovingAverage(y, window)
		if err != nil {
			t.Fatal(err)
		}
		for j := range y {
			k := min(window/2, j, len(y)-1-j)
			var s float64
			for i := j - k; i <= j+k; i++ {
				s += y[i]
			}
			want := s / float64(2*k+1)
			if math.Abs(out[j]-want) > 1e-12*1e3 {
				t.Errorf("window %d, point %d: %.15g, want %.15g", window, j, out[j], want)
			}
		}
	}
}

func TestMovingAverageNoDrift(t *testing.T) {
	// Large excursions (a 1e12 step that returns to 0) followed by a long
	// stretch of small values: a plain running sum would keep an error of
	// about 1e12·ε ≈ 1e-4 forever; the compensated sum returns the small
	// values to full precision (common practice).
	const n = 1_000_000
	y := make([]float64, n)
	for i := range y {
		y[i] = 1e-3 * float64(i%7)
	}
	for i := 1000; i < 1100; i++ {
		y[i] = 1e12 + 0.1*float64(i)
	}
	out, err := MovingAverage(y, 21)
	if err != nil {
		t.Fatal(err)
	}
	for _, j := range []int{5000, 500_000, n - 11} {
		var s float64
		for i := j - 10; i <= j+10; i++ {
			s += y[i]
		}
		if d := math.Abs(out[j] - s/21); d > 1e-15 {
			t.Errorf("point %d: %.17g, want %.17g (diff %.3g)", j, out[j], s/21, d)
		}
	}
}

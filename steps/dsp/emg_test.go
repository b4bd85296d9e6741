package dsp

import (
	"math"
	"testing"
)

func relErr(got, want float64) float64 {
	if got == want {
		return 0
	}
	return math.Abs(got-want) / math.Abs(want)
}

// erfcxContinuedFraction evaluates Laplace's continued fraction
// erfcx(x) = (1/√π)·1/(x + (1/2)/(x + 1/(x + (3/2)/(x + …)))) backwards from a
// deep level; handbook formula (Abramowitz & Stegun 7.1.14, from memory). It
// is an algorithm independent of Erfcx, good to full precision for x ≥ 2.
func erfcxContinuedFraction(x float64) float64 {
	f := x
	for k := 4000; k >= 1; k-- {
		f = x + float64(k)/2/f
	}
	return 1 / (math.SqrtPi * f)
}

func TestErfcxAgainstErfc(t *testing.T) {
	// Definition erfcx(x) = exp(x²)·erfc(x) (common practice). The plain
	// product loses about x²·ε to the rounding of x², so the tolerance grows
	// with x².
	for x := -26.0; x <= 26.0; x += 0.0625 {
		want := math.Exp(x*x) * math.Erfc(x)
		if math.IsInf(want, 0) || want == 0 {
			continue
		}
		tol := 1e-14 + 4*x*x*0x1p-52
		if e := relErr(Erfcx(x), want); e > tol {
			t.Errorf("Erfcx(%g) = %.17g, exp(x²)·erfc(x) = %.17g, rel err %.3g > %.3g", x, Erfcx(x), want, e, tol)
		}
	}
}

func TestErfcxAgainstContinuedFraction(t *testing.T) {
	for _, x := range []float64{2, 2.5, 3, 5, 8, 13, 25.9, 26, 26.1, 30, 50, 1e3, 1e6} {
		want := erfcxContinuedFraction(x)
		if e := relErr(Erfcx(x), want); e > 1e-13 {
			t.Errorf("Erfcx(%g) = %.17g, continued fraction %.17g, rel err %.3g", x, Erfcx(x), want, e)
		}
	}
}

func TestErfcxAsymptoticSeries(t *testing.T) {
	// Leading terms of the asymptotic series
	// 1/(x√π)·(1 − 1/(2x²) + 3/(4x⁴) − 15/(8x⁶)) (Abramowitz & Stegun 7.1.23,
	// from memory); the omitted term is 105/(16x⁸), below 1e-15 relative from
	// x = 100 on.
	for _, x := range []float64{100, 1e3, 1e5, 1e8, 1e50, 1e150, 1e300} {
		v := 1 / (x * x)
		want := (1 - v/2 + 0.75*v*v - 1.875*v*v*v) / (x * math.SqrtPi)
		if e := relErr(Erfcx(x), want); e > 1e-13 {
			t.Errorf("Erfcx(%g) = %.17g, series %.17g, rel err %.3g", x, Erfcx(x), want, e)
		}
	}
}

func TestErfcxNegative(t *testing.T) {
	// Reflection erfc(−x) = 2 − erfc(x), so erfcx(−x) + erfcx(x) = 2·exp(x²)
	// (common practice), checked where the plain product is still accurate.
	for x := 0.0; x <= 5; x += 0.125 {
		sum := Erfcx(-x) + Erfcx(x)
		if e := relErr(sum, 2*math.Exp(x*x)); e > 1e-14 {
			t.Errorf("Erfcx(−%g)+Erfcx(%g) = %.17g, want 2·exp(x²) = %.17g", x, x, sum, 2*math.Exp(x*x))
		}
	}
	// 2·exp(x²) passes the float64 maximum at x = −√(ln(MaxFloat64/2)) ≈ −26.62.
	edge := -math.Sqrt(math.Log(math.MaxFloat64 / 2))
	if v := Erfcx(edge + 1e-3); math.IsInf(v, 0) || math.IsNaN(v) {
		t.Errorf("Erfcx(%g) = %g, want finite", edge+1e-3, v)
	}
	for _, x := range []float64{edge - 1e-3, -30, -1e10, -math.MaxFloat64} {
		if v := Erfcx(x); !math.IsInf(v, 1) {
			t.Errorf("Erfcx(%g) = %g, want +Inf (true value overflows)", x, v)
		}
	}
	if v := Erfcx(0); v != 1 {
		t.Errorf("Erfcx(0) = %g, want 1", v)
	}
	if v := Erfcx(math.MaxFloat64); !(v > 0) || math.IsInf(v, 0) {
		t.Errorf("Erfcx(MaxFloat64) = %g, want a small positive number", v)
	}
}

func TestGaussianWidths(t *testing.T) {
	// check-values.md §2: half height at t_R ± σ√(2 ln 2); e^−½ of the height
	// at the inflection points t_R ± σ [D].
	const h, mu, sigma = 7.5, 3.0, 0.4
	half := sigma * math.Sqrt(2*math.Ln2)
	for _, c := range []struct{ t, want float64 }{
		{mu, h},
		{mu - half, h / 2},
		{mu + half, h / 2},
		{mu + sigma, h * math.Exp(-0.5)},
	} {
		if e := relErr(Gaussian(c.t, h, mu, sigma), c.want); e > 1e-14 {
			t.Errorf("Gaussian(%g) = %.17g, want %.17g", c.t, Gaussian(c.t, h, mu, sigma), c.want)
		}
	}
	if !math.IsNaN(Gaussian(0, 1, 0, 0)) {
		t.Error("Gaussian with sigma 0 should be NaN")
	}
}

// integrate applies the trapezoid rule to f over [a, b] with n intervals;
// for smooth functions that decay to zero at both ends it converges faster
// than any power of the step (common practice).
func integrate(f func(float64) float64, a, b float64, n int) float64 {
	h := (b - a) / float64(n)
	s := 0.5 * (f(a) + f(b))
	for i := 1; i < n; i++ {
		s += f(a + float64(i)*h)
	}
	return s * h
}

func TestEMGMoments(t *testing.T) {
	// Moments [S] check-values.md §10: mean μ+τ, variance σ²+τ², skewness
	// 2τ³/(σ²+τ²)^{3/2}; μ = 0, σ = τ = 1 gives area 1, mean 1, variance 2
	// and skewness 0.7071068 [D].
	cases := []struct{ area, mu, sigma, tau float64 }{
		{1, 0, 1, 1},
		{2.5, 10, 0.5, 0.1},
		{1e4, -3, 2, 5},
		{0.01, 100, 0.03, 0.06},
		{3, 1, 1, 0},
	}
	for _, c := range cases {
		a := c.mu - 15*c.sigma
		b := c.mu + 15*c.sigma + 45*c.tau
		n := int(math.Ceil((b - a) / (0.02 * c.sigma)))
		m := func(k int) float64 {
			return integrate(func(t float64) float64 {
				return math.Pow(t, float64(k)) * EMG(t, c.area, c.mu, c.sigma, c.tau)
			}, a, b, n)
		}
		area := m(0)
		mean := m(1) / area
		cm := func(k int) float64 {
			return integrate(func(t float64) float64 {
				return math.Pow(t-mean, float64(k)) * EMG(t, c.area, c.mu, c.sigma, c.tau)
			}, a, b, n) / area
		}
		variance := cm(2)
		skew := cm(3) / math.Pow(variance, 1.5)
		s2 := c.sigma*c.sigma + c.tau*c.tau
		wantSkew := 2 * math.Pow(c.tau, 3) / math.Pow(s2, 1.5)
		if e := relErr(area, c.area); e > 1e-9 {
			t.Errorf("%+v: area %.12g, want %g", c, area, c.area)
		}
		if d := math.Abs(mean - (c.mu + c.tau)); d > 1e-9*math.Sqrt(s2) {
			t.Errorf("%+v: mean %.12g, want %g", c, mean, c.mu+c.tau)
		}
		if e := relErr(variance, s2); e > 1e-8 {
			t.Errorf("%+v: variance %.12g, want %g", c, variance, s2)
		}
		if d := math.Abs(skew - wantSkew); d > 1e-7 {
			t.Errorf("%+v: skewness %.10g, want %.10g", c, skew, wantSkew)
		}
	}
}

// emgShape finds the apex of a unit-area EMG with σ = 1, μ = 0 by golden
// section and the crossings of the given fractions of the apex height by
// bisection.
type emgShape struct {
	tau, apex, height float64
}

func newEMGShape(tau float64) emgShape {
	f := func(t float64) float64 { return EMG(t, 1, 0, 1, tau) }
	a, b := -1.0, 3+tau
	g := (math.Sqrt(5) - 1) / 2
	for b-a > 1e-10 {
		c, d := b-g*(b-a), a+g*(b-a)
		if f(c) > f(d) {
			b = d
		} else {
			a = c
		}
	}
	apex := (a + b) / 2
	return emgShape{tau: tau, apex: apex, height: f(apex)}
}

// crossing returns where the peak passes frac·height on the leading
// (side < 0) or trailing (side > 0) edge.
func (s emgShape) crossing(frac float64, side int) float64 {
	level := frac * s.height
	inner, outer := s.apex, s.apex-20
	if side > 0 {
		outer = s.apex + 20 + 30*s.tau
	}
	for range 200 {
		mid := (inner + outer) / 2
		if EMG(mid, 1, 0, 1, s.tau) > level {
			inner = mid
		} else {
			outer = mid
		}
	}
	return (inner + outer) / 2
}

func TestEMGPeakShapeTable(t *testing.T) {
	// check-values.md §10, peak-shape figures versus τ/σ [D], σ = 1, A = 1,
	// tolerance 1e-3. T = W0.05/(2f) is the USP tailing factor and B/A the
	// asymmetry at 10 % height (formulas: check-values.md §3 and §10).
	table := []struct{ tau, apex, height, w50, usp, ba float64 }{
		{0, 0, 0.39894, 2.3548, 1.0000, 1.0000},
		{0.25, 0.2372, 0.38788, 2.4194, 1.0104, 1.0176},
		{0.5, 0.4281, 0.36400, 2.5589, 1.0572, 1.0929},
		{0.75, 0.5774, 0.33769, 2.7214, 1.1340, 1.2132},
		{1.0, 0.6974, 0.31283, 2.8909, 1.2282, 1.3622},
		{1.5, 0.8809, 0.27064, 3.2362, 1.4354, 1.7006},
		{2.0, 1.0179, 0.23764, 3.5865, 1.6481, 2.0556},
		{3.0, 1.2154, 0.19061, 4.3003, 2.0698, 2.7660},
	}
	const tol = 1e-3
	for _, row := range table {
		s := newEMGShape(row.tau)
		w50 := s.crossing(0.5, +1) - s.crossing(0.5, -1)
		f05 := s.apex - s.crossing(0.05, -1)
		usp := (s.crossing(0.05, +1) - s.crossing(0.05, -1)) / (2 * f05)
		ba := (s.crossing(0.1, +1) - s.apex) / (s.apex - s.crossing(0.1, -1))
		for _, c := range []struct {
			name      string
			got, want float64
		}{
			{"apex−μ", s.apex, row.apex},
			{"height·σ", s.height, row.height},
			{"W0.5/σ", w50, row.w50},
			{"USP T", usp, row.usp},
			{"B/A", ba, row.ba},
		} {
			if math.Abs(c.got-c.want) > tol {
				t.Errorf("τ/σ = %g: %s = %.5f, want %.5f", row.tau, c.name, c.got, c.want)
			}
		}
	}
}

func TestEMGDefiningForm(t *testing.T) {
	// Where the defining formula of check-values.md §10 [S] neither overflows
	// nor underflows, EMG must agree with it.
	def := func(t, a, mu, sigma, tau float64) float64 {
		x := t - mu
		z := (sigma/tau - x/sigma) / math.Sqrt2
		return a / (2 * tau) * math.Exp(sigma*sigma/(2*tau*tau)-x/tau) * math.Erfc(z)
	}
	for _, tau := range []float64{0.2, 0.5, 1, 3, 10} {
		for x := -4.0; x <= 30; x += 0.25 {
			want := def(x, 2, 0, 1, tau)
			if want < 1e-200 {
				continue
			}
			if e := relErr(EMG(x, 2, 0, 1, tau), want); e > 1e-12 {
				t.Errorf("EMG(%g; τ=%g) = %.17g, defining form %.17g, rel err %.3g", x, tau, EMG(x, 2, 0, 1, tau), want, e)
			}
		}
	}
}

func TestEMGLimits(t *testing.T) {
	// τ → 0: the EMG is the Gaussian convolved with a vanishing exponential,
	// i.e. the Gaussian of the same area shifted by τ up to O(τ²)
	// (first-moment argument, common practice).
	for _, tau := range []float64{0, 1e-30, 1e-12, 1e-9} {
		for x := -8.0; x <= 8; x += 0.5 {
			want := Gaussian(x, 3/math.Sqrt(2*math.Pi), tau, 1)
			if e := relErr(EMG(x, 3, 0, 1, tau), want); e > 1e-7*math.Max(tau*1e9, 1e-6) {
				t.Errorf("EMG(%g; τ=%g) = %.17g, shifted Gaussian %.17g, rel err %.3g", x, tau, EMG(x, 3, 0, 1, tau), want, e)
			}
		}
	}
	// τ ≫ σ: right of the Gaussian the EMG is (A/τ)·exp(σ²/(2τ²) − x/τ)·erfc(z)/2
	// with erfc(z) → 2, i.e. the exponential decay (common practice).
	for _, tau := range []float64{1e6, 1e25} {
		for _, x := range []float64{40, 1e3, 1e6, 3e7} {
			want := 1 / tau * math.Exp(0.5/(tau*tau)-x/tau)
			if e := relErr(EMG(x, 1, 0, 1, tau), want); e > 1e-12 {
				t.Errorf("EMG(%g; τ=%g) = %.17g, exponential %.17g", x, tau, EMG(x, 1, 0, 1, tau), want)
			}
		}
	}
}

func TestEMGFiniteEverywhere(t *testing.T) {
	ts := []float64{-1e300, -1e10, -50, -5, 0, 1e-300, 5, 50, 1e10, 1e300}
	sigmas := []float64{1e-300, 1e-10, 1e-3, 1, 1e3, 1e10}
	taus := []float64{0, 1e-320, 1e-300, 1e-30, 1e-10, 1e-3, 1, 1e3, 1e10, 1e300}
	for _, tt := range ts {
		for _, s := range sigmas {
			for _, tau := range taus {
				v := EMG(tt, 1e-3, 0, s, tau)
				// The peak height is at most area/(σ√(2π)), which may itself
				// overflow only for σ below ~1e-306; none here.
				if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
					t.Errorf("EMG(t=%g, σ=%g, τ=%g) = %g", tt, s, tau, v)
				}
			}
		}
	}
	for _, bad := range [][2]float64{{0, 1}, {-1, 1}, {1, -1}, {math.NaN(), 1}} {
		if v := EMG(0, 1, 0, bad[0], bad[1]); !math.IsNaN(v) {
			t.Errorf("EMG(σ=%g, τ=%g) = %g, want NaN", bad[0], bad[1], v)
		}
	}
}

func FuzzEMG(f *testing.F) {
	f.Add(0.5, 1.0, 0.0, 1.0, 1.0)
	f.Add(1e6, 1.0, 0.0, 1e-3, 1e3)
	f.Add(-40.0, 5.0, 2.0, 0.01, 1e-25)
	f.Fuzz(func(t *testing.T, x, area, mu, sigma, tau float64) {
		if math.IsNaN(x+area+mu+sigma+tau) || math.IsInf(x+area+mu+sigma+tau, 0) {
			return
		}
		sigma, tau, area = math.Abs(sigma), math.Abs(tau), math.Abs(area)
		// Keep the true value finite: the peak height is below
		// area/(σ√(2π)), and keep t − μ finite.
		if sigma < 1e-150 || area > 1e150 || math.Abs(x) > 1e300 || math.Abs(mu) > 1e300 {
			return
		}
		v := EMG(x, area, mu, sigma, tau)
		if math.IsNaN(v) || math.IsInf(v, 0) || v < 0 {
			t.Fatalf("EMG(%g, %g, %g, %g, %g) = %g", x, area, mu, sigma, tau, v)
		}
	})
}

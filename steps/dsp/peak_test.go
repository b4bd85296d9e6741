package dsp

import (
	"fmt"
	"math"
	"testing"
)

// sampled returns f at t0, t0+dt, … up to t1.
func sampled(f func(float64) float64, t0, t1, dt float64) []float64 {
	n := int((t1-t0)/dt) + 1
	y := make([]float64, n)
	for i := range y {
		y[i] = f(t0 + float64(i)*dt)
	}
	return y
}

// argmax returns the index of the largest y (the first on ties).
func argmax(y []float64) int {
	k := 0
	for i, v := range y {
		if v > y[k] {
			k = i
		}
	}
	return k
}

// figures measures a sampled peak y (times t0 + i·dt) the way the integrate
// step does, over the whole series.
type figures struct {
	rt, height, wHalf, w5, lead5, w10, lead10 float64
}

func measureSampled(t *testing.T, y []float64, t0, dt float64) figures {
	t.Helper()
	k := argmax(y)
	pos, h := Apex(y, k)
	f := figures{rt: t0 + pos*dt, height: h}
	for _, c := range []struct {
		frac        float64
		width, lead *float64
	}{{0.5, &f.wHalf, nil}, {0.05, &f.w5, &f.lead5}, {0.10, &f.w10, &f.lead10}} {
		l, r, ok := Crossings(y, k, 0, len(y)-1, c.frac*h)
		if !ok {
			t.Fatalf("no crossing at %g of the height", c.frac)
		}
		*c.width = (r - l) * dt
		if c.lead != nil {
			*c.lead = pos*dt - l*dt
		}
	}
	return f
}

func TestSampledGaussian(t *testing.T) {
	// check-values.md §2 and §3, synthetic Gaussian row: σ = 0.05 min,
	// tR = 10 min, no noise.
	//
	// Tolerance: linear interpolation between samples misplaces a crossing
	// by at most dt²/8·|y″/y′|, which is 0.041·dt²/σ at half height and
	// 0.255·dt²/σ at 5 % (y″/y′ = (x²−σ²)/(x·σ²) for a Gaussian; derived);
	// over the widths 2.355σ and 4.895σ that is a relative error below
	// 0.11·(dt/σ)², doubled for N ∝ 1/w². The grid is offset by 0.3 sample
	// so that the apex falls between samples; the vertex of the parabola
	// through three samples is then off by O((dt/σ)²) samples in time and
	// O((dt/σ)⁴) in height (Taylor series of the Gaussian; derived), bounded
	// here by 0.1·(dt/σ)² samples and (dt/σ)⁴.
	const sigma, tR = 0.05, 10.0
	for _, hz := range []float64{20, 100} {
		t.Run(fmt.Sprintf("%g Hz", hz), func(t *testing.T) {
			dt := 1 / (60 * hz)
			t0 := tR - 0.5 + 0.3*dt
			y := sampled(func(x float64) float64 { return Gaussian(x, 1, tR, sigma) }, t0, tR+0.5, dt)
			f := measureSampled(t, y, t0, dt)
			q := (dt / sigma) * (dt / sigma)
			rel := 0.11 * q
			checks := []struct {
				name      string
				got, want float64
				rel       float64
			}{
				{"apex time", f.rt, tR, 0.1 * q * dt / tR},                                            // derived (see above)
				{"apex height", f.height, 1, q * q},                                                   // derived (see above)
				{"W0.5/σ", f.wHalf / sigma, 2.3548200, rel},                                           // §2
				{"W0.05/σ", f.w5 / sigma, 4.8954937, rel},                                             // §2
				{"symmetry factor", Symmetry(f.w5, f.lead5), 1, rel},                                  // §2, §3: exactly 1 for a Gaussian
				{"N (5.54)", PlateNumber(f.rt, f.wHalf, PlatesPharmacopoeia), 39962.65, 2e-7 + 2*rel}, // §3 synthetic Gaussian row
				{"N (8 ln 2)", PlateNumber(f.rt, f.wHalf, PlatesExact), 40000, 2 * rel},               // §3: (tR/σ)²
			}
			for _, c := range checks {
				if math.Abs(c.got/c.want-1) > c.rel {
					t.Errorf("%s = %.9g, want %.9g (relative tolerance %.2g)", c.name, c.got, c.want, c.rel)
				}
			}
		})
	}
}

func TestSampledEMG(t *testing.T) {
	// check-values.md §10, peak-shape figures versus τ/σ (σ = 1, area 1,
	// μ = 0), tolerance 1e-3 as stated there. Sampled every 0.002σ, the
	// interpolation errors (see TestSampledGaussian) are far below it.
	const dt = 0.002
	for _, row := range []struct {
		tau                          float64
		apex, height, wHalf, usp, ba float64
	}{
		{0, 0, 0.39894, 2.3548, 1.0000, 1.0000},
		{0.25, 0.2372, 0.38788, 2.4194, 1.0104, 1.0176},
		{0.5, 0.4281, 0.36400, 2.5589, 1.0572, 1.0929},
		{0.75, 0.5774, 0.33769, 2.7214, 1.1340, 1.2132},
		{1.0, 0.6974, 0.31283, 2.8909, 1.2282, 1.3622},
		{1.5, 0.8809, 0.27064, 3.2362, 1.4354, 1.7006},
		{2.0, 1.0179, 0.23764, 3.5865, 1.6481, 2.0556},
		{3.0, 1.2154, 0.19061, 4.3003, 2.0698, 2.7660},
	} {
		t.Run(fmt.Sprintf("tau=%g", row.tau), func(t *testing.T) {
			t0 := -8.0
			y := sampled(func(x float64) float64 { return EMG(x, 1, 0, 1, row.tau) }, t0, 12+12*row.tau, dt)
			f := measureSampled(t, y, t0, dt)
			for _, c := range []struct {
				name      string
				got, want float64
			}{
				{"apex − μ", f.rt, row.apex},
				{"height·σ", f.height, row.height},
				{"W0.5/σ", f.wHalf, row.wHalf},
				{"USP T = W0.05/2f", Symmetry(f.w5, f.lead5), row.usp},
				{"B/A at 10 %", (f.w10 - f.lead10) / f.lead10, row.ba},
			} {
				if math.Abs(c.got-c.want) > 1e-3 {
					t.Errorf("%s = %.5f, want %.5f ± 1e-3", c.name, c.got, c.want)
				}
			}
		})
	}
}

func TestApex(t *testing.T) {
	// The vertex of a sampled parabola is found exactly (three points fix a
	// parabola; derived).
	parab := func(x float64) float64 { return 3 - 0.5*(x-4.3)*(x-4.3) }
	y := sampled(parab, 0, 9, 1)
	for _, tc := range []struct {
		name     string
		y        []float64
		i        int
		pos, hgt float64
	}{
		{"parabola", y, 4, 4.3, 3},
		{"first sample", []float64{5, 4, 1}, 0, 0, 5},
		{"last sample", []float64{1, 4, 5}, 2, 2, 5},
		{"not a maximum", []float64{1, 2, 3}, 1, 1, 2},
		{"flat", []float64{2, 2, 2}, 1, 1, 2},
		{"symmetric", []float64{1, 3, 1}, 1, 1, 3},
	} {
		t.Run(tc.name, func(t *testing.T) {
			pos, h := Apex(tc.y, tc.i)
			if math.Abs(pos-tc.pos) > 1e-12 || math.Abs(h-tc.hgt) > 1e-12 {
				t.Errorf("Apex = (%g, %g), want (%g, %g)", pos, h, tc.pos, tc.hgt)
			}
		})
	}
}

func TestCrossings(t *testing.T) {
	// A triangle is linear between samples, so its crossings are exact.
	tri := []float64{0, 1, 2, 3, 4, 3, 2, 1, 0}
	for _, tc := range []struct {
		name             string
		y                []float64
		apex, start, end int
		level            float64
		left, right      float64
		ok               bool
	}{
		{"half height", tri, 4, 0, 8, 2, 2, 6, true},
		{"between samples", tri, 4, 0, 8, 2.5, 2.5, 5.5, true},
		{"at the base", tri, 4, 0, 8, 0, 0, 8, true},
		{"cut on the left", tri, 4, 3, 8, 2, 0, 0, false},
		{"cut on the right", tri, 4, 0, 5, 2, 0, 0, false},
		{"apex not above level", tri, 4, 0, 8, 4, 0, 0, false},
		{"apex outside bounds", tri, 4, 5, 8, 1, 0, 0, false},
		{"bounds clipped to the series", tri, 4, -3, 20, 1, 1, 7, true},
		// The first fall to the level counts, not a later one.
		{"shoulder", []float64{0, 3, 1, 4, 6, 4, 0}, 4, 0, 6, 2, 2 + 1.0/3, 5.5, true},
	} {
		t.Run(tc.name, func(t *testing.T) {
			l, r, ok := Crossings(tc.y, tc.apex, tc.start, tc.end, tc.level)
			if ok != tc.ok || (ok && (math.Abs(l-tc.left) > 1e-12 || math.Abs(r-tc.right) > 1e-12)) {
				t.Errorf("Crossings = (%g, %g, %v), want (%g, %g, %v)", l, r, ok, tc.left, tc.right, tc.ok)
			}
		})
	}
}

func TestSuitabilityFormulas(t *testing.T) {
	// check-values.md §3, worked check values (times in min).
	for _, c := range []struct {
		name      string
		got, want float64
		tol       float64
	}{
		{"Rs 1.18", Resolution(10.0, 10.5, 0.20, 0.22, ResolutionPharmacopoeia), 1.404762, 5e-7},
		{"Rs exact", Resolution(10.0, 10.5, 0.20, 0.22, ResolutionExact), 1.401679, 5e-7},
		{"N 5.54", PlateNumber(10.0, 0.20, PlatesPharmacopoeia), 13850.0, 1e-9},
		{"N 8 ln 2", PlateNumber(10.0, 0.20, PlatesExact), 13862.94, 5e-3},
		{"symmetry factor", Symmetry(0.30, 0.12), 1.25, 1e-12},
		{"S/N", SignalToNoise(50.0, 4.0), 25.0, 1e-12},
		// §2: 8 ln 2 = 5.5451774 and √(2 ln 2) = 1.1774100.
		{"8 ln 2", PlatesExact, 5.5451774, 5e-8},
		{"√(2 ln 2)", ResolutionExact, 1.1774100, 5e-8},
		// Not measurable: 0, never Inf or NaN.
		{"Rs without a width", Resolution(10, 10.5, 0, 0.22, 1.18), 0, 0},
		{"N without a width", PlateNumber(10, 0, 5.54), 0, 0},
		{"N with a NaN width", PlateNumber(10, math.NaN(), 5.54), 0, 0},
		{"symmetry without a lead", Symmetry(0.3, 0), 0, 0},
		{"S/N without noise", SignalToNoise(50, 0), 0, 0},
	} {
		if math.Abs(c.got-c.want) > c.tol || math.IsNaN(c.got) {
			t.Errorf("%s = %.9g, want %.9g ± %g", c.name, c.got, c.want, c.tol)
		}
	}
}

package dsp

import (
	"math"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// rngSplitMix is a deterministic pseudo-random source: the splitmix64
// generator (Steele, Lea & Flood 2014, constants from memory) with the
// Box–Muller transform for normal deviates (common practice).
type rngSplitMix struct{ state uint64 }

func newRNGSplitMix(seed uint64) *rngSplitMix { return &rngSplitMix{state: seed} }

func (r *rngSplitMix) next() uint64 {
	r.state += 0x9e3779b97f4a7c15
	z := r.state
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// uniform returns a value in (0, 1].
func (r *rngSplitMix) uniform() float64 {
	return (float64(r.next()>>11) + 1) / (1 << 53)
}

// normal returns a standard normal deviate.
func (r *rngSplitMix) normal() float64 {
	return math.Sqrt(-2*math.Log(r.uniform())) * math.Cos(2*math.Pi*r.uniform())
}

// purityTrace synthesises a solvent-purity chromatogram of n points at unit
// spacing: a main EMG peak of about 99.6 area % whose apex is about 1e5
// noise SDs high, four impurities of 0.01–0.2 area % (two on the flanks of
// the main peak, two elsewhere), on a baseline drifting by a decaying
// exponential plus a gentle quadratic, with unit-SD Gaussian noise. Peak
// widths are sigma and tau points. It returns the data, the true baseline,
// the apex index of the main peak, its width at half height and its peak
// signal alone.
func purityTrace(n int, sigma, tau float64, seed uint64) (y, base []float64, apex, w50 float64, main []float64) {
	rng := newRNGSplitMix(seed)
	shape := newEMGShape(tau / sigma) // unit σ, centred at 0
	w50 = (shape.crossing(0.5, +1) - shape.crossing(0.5, -1)) * sigma
	apex = float64(n) / 2
	mu := apex - shape.apex*sigma
	areaMain := 1e5 * sigma / shape.height // apex 1e5 above the baseline
	imps := []struct{ mu, frac float64 }{
		{mu - 3*w50, 0.0005},       // leading flank
		{mu + 4*w50, 0.001},        // trailing flank, on the tail
		{0.2 * float64(n), 0.002},  // elsewhere
		{0.8 * float64(n), 0.0001}, // a trace one, about 12 noise SDs high
	}
	y = make([]float64, n)
	base = make([]float64, n)
	main = make([]float64, n)
	for i := range y {
		x := float64(i)
		u := (x - apex) / float64(n)
		base[i] = 50 + 30*math.Exp(-x/(0.3*float64(n))) + 80*u*u
		main[i] = EMG(x, areaMain, mu, sigma, tau)
		v := base[i] + main[i]
		for _, p := range imps {
			v += EMG(x, p.frac*areaMain, p.mu, sigma, tau)
		}
		y[i] = v + rng.normal()
	}
	return y, base, apex, w50, main
}

func TestWhittakerStraightLine(t *testing.T) {
	// check-values.md §9 analytic check [D]: with all weights 1 and second
	// differences the Whittaker smoother returns any straight line exactly,
	// for any λ. Any other non-negative weights (at least two positive) keep
	// the line a solution, because D·line = 0 [D].
	for _, n := range []int{3, 4, 5, 17, 1000, 100_000} {
		for _, lambda := range []float64{1e-3, 1, 1e4, 1e7, 1e10, 1e14} {
			for _, weights := range []string{"unit", "mixed"} {
				y := make([]float64, n)
				w := make([]float64, n)
				z := make([]float64, n)
				for i := range y {
					y[i] = -812.5 + 0.37*float64(i)
					w[i] = 1
					if weights == "mixed" && i%3 == 1 {
						w[i] = [3]float64{0, 0.001, 25}[i%9/3]
					}
				}
				if err := Whittaker(y, w, lambda, z); err != nil {
					t.Fatalf("n %d λ %g: %v", n, lambda, err)
				}
				for i := range y {
					if e := relErr(z[i], y[i]); e > 1e-9 {
						t.Errorf("n %d λ %g %s weights: z[%d] = %.15g, want %.15g", n, lambda, weights, i, z[i], y[i])
						break
					}
				}
			}
		}
	}
}

func TestWhittakerFrequencyResponse(t *testing.T) {
	// Far from the ends, the Whittaker smoother with unit weights is the
	// filter 1/(1 + λ·|1 − e^{iω}|⁴) = 1/(1 + 16λ·sin⁴(ω/2)) (from the
	// normal equations z + λ·DᵀD·z = y, common practice). A cosine at the
	// half-power frequency must come out halved. The rounding error of the
	// banded solve grows like λ^(7/8)·ε relative to the curved part, which
	// sets the tolerance.
	const n = 40000
	for _, lambda := range []float64{10, 1e4, 1e7, 1e10} {
		omega := 2 * math.Asin(math.Pow(16*lambda, -0.25))
		gain := 1 / (1 + 16*lambda*math.Pow(math.Sin(omega/2), 4))
		y := make([]float64, n)
		w := make([]float64, n)
		z := make([]float64, n)
		for i := range y {
			y[i] = 1000 + 0.01*float64(i) + math.Cos(omega*float64(i))
			w[i] = 1
		}
		if err := Whittaker(y, w, lambda, z); err != nil {
			t.Fatal(err)
		}
		tol := 1e-12 + 8*math.Pow(lambda, 0.875)*0x1p-52
		for i := 15000; i < 25000; i++ {
			want := 1000 + 0.01*float64(i) + gain*math.Cos(omega*float64(i))
			if d := math.Abs(z[i] - want); d > tol {
				t.Errorf("λ %g (gain %.4f): z[%d] = %.15g, want %.15g (diff %.3g > %.3g)", lambda, gain, i, z[i], want, d, tol)
				break
			}
		}
	}
}

func TestWhittakerDenseReference(t *testing.T) {
	// The banded LDLᵀ solve against a dense Cholesky solve of the same normal
	// equations (W + λDᵀD)z = Wy (check-values.md §9 [S] equation), with
	// irregular weights including zeros.
	const n = 60
	rng := newRNGSplitMix(3)
	for _, lambda := range []float64{0.5, 100, 1e5} {
		y := make([]float64, n)
		w := make([]float64, n)
		for i := range y {
			y[i] = 10*math.Sin(float64(i)/7) + rng.normal()
			w[i] = rng.uniform()
			if i%5 == 2 {
				w[i] = 0
			}
		}
		a := mat.NewSymDense(n, nil)
		rhs := mat.NewVecDense(n, nil)
		for i := range n {
			a.SetSym(i, i, w[i])
			rhs.SetVec(i, w[i]*y[i])
		}
		for k := 0; k+2 < n; k++ {
			d := [3]float64{1, -2, 1}
			for p := range 3 {
				for q := p; q < 3; q++ {
					a.SetSym(k+p, k+q, a.At(k+p, k+q)+lambda*d[p]*d[q])
				}
			}
		}
		var ch mat.Cholesky
		if !ch.Factorize(a) {
			t.Fatal("dense reference: matrix not positive definite")
		}
		var want mat.VecDense
		if err := ch.SolveVecTo(&want, rhs); err != nil {
			t.Fatal(err)
		}
		z := make([]float64, n)
		if err := Whittaker(y, w, lambda, z); err != nil {
			t.Fatal(err)
		}
		for i := range z {
			if d := math.Abs(z[i] - want.AtVec(i)); d > 1e-9 {
				t.Errorf("λ %g: z[%d] = %.15g, dense %.15g", lambda, i, z[i], want.AtVec(i))
			}
		}
	}
}

func TestWhittakerErrors(t *testing.T) {
	ones := func(n int) []float64 {
		v := make([]float64, n)
		for i := range v {
			v[i] = 1
		}
		return v
	}
	oneWeight := make([]float64, 5)
	oneWeight[2] = 1
	for _, c := range []struct {
		name      string
		y, w, z   []float64
		lambda    float64
		substring string
	}{
		{"lengths", ones(5), ones(4), ones(5), 1, "5 data points but 4 weights and 5 outputs"},
		{"short", ones(2), ones(2), ones(2), 1, "too short"},
		{"lambda zero", ones(5), ones(5), ones(5), 0, "lambda must be positive"},
		{"lambda NaN", ones(5), ones(5), ones(5), math.NaN(), "lambda must be positive"},
		{"negative weight", ones(5), []float64{1, 1, -1, 1, 1}, ones(5), 1, "weight 2 is -1"},
		{"one weight", ones(5), oneWeight, ones(5), 1, "1 positive weights"},
		{"NaN data", []float64{1, 2, math.NaN(), 4}, ones(4), ones(4), 1, "data point 2 is NaN"},
	} {
		err := Whittaker(c.y, c.w, c.lambda, c.z)
		if err == nil || !strings.Contains(err.Error(), c.substring) {
			t.Errorf("%s: error %v, want it to mention %q", c.name, err, c.substring)
		}
	}
}

func TestNormalExpectile(t *testing.T) {
	// Defining equation of the p-expectile (Newey & Powell 1987, from
	// memory): p·E[(X−e)⁺] = (1−p)·E[(e−X)⁺], checked by quadrature of the
	// normal density; e(½) = 0 by symmetry.
	for _, p := range []float64{0.001, 0.01, 0.1, 0.3, 0.5} {
		e := normalExpectile(p)
		above := integrate(func(x float64) float64 { return math.Max(x-e, 0) * Gaussian(x, 1/math.Sqrt(2*math.Pi), 0, 1) }, e, 40, 200000)
		below := integrate(func(x float64) float64 { return math.Max(e-x, 0) * Gaussian(x, 1/math.Sqrt(2*math.Pi), 0, 1) }, -40, e, 200000)
		if d := p*above - (1-p)*below; math.Abs(d) > 1e-9 {
			t.Errorf("p %g: e = %.6f leaves p·E(X−e)⁺ − (1−p)·E(e−X)⁺ = %.3g", p, e, d)
		}
	}
	if e := normalExpectile(0.5); math.Abs(e) > 1e-12 {
		t.Errorf("e(0.5) = %g, want 0", e)
	}
}

func TestMedianAndNoise(t *testing.T) {
	// The median against sorting (definition), with ties and both parities.
	rng := newRNGSplitMix(11)
	for _, n := range []int{1, 2, 3, 10, 11, 1000, 1001} {
		a := make([]float64, n)
		for i := range a {
			a[i] = math.Round(rng.normal() * 3)
		}
		s := slices.Clone(a)
		slices.Sort(s)
		want := (s[(n-1)/2] + s[n/2]) / 2
		if got := medianInPlace(a); got != want {
			t.Errorf("n %d: median %g, want %g", n, got, want)
		}
	}
	// The first-difference MAD estimate recovers the SD of white noise on a
	// drifting line with a few tall peaks (1.4826·MAD is a consistent SD
	// estimate for normal data, common practice); 2 % for 200,000 points.
	const n, sd = 200_000, 2.5
	y := make([]float64, n)
	for i := range y {
		y[i] = 0.01*float64(i) + sd*rng.normal() + Gaussian(float64(i%20000), 1e4, 10000, 8)
	}
	if got := diffNoiseSD(y, make([]float64, n)); math.Abs(got/sd-1) > 0.02 {
		t.Errorf("noise SD %g, want %g", got, sd)
	}
}

func TestAsLSLineAndSinglePeak(t *testing.T) {
	// check-values.md §9 analytic checks [D]: AsLS on a noise-free straight
	// line returns the line (1e-9 relative); with one positive Gaussian on a
	// straight baseline the final baseline lies below the data under the
	// peak and within a few percent of the true line.
	const n = 2000
	line := func(i int) float64 { return 120 - 0.015*float64(i) }
	for _, clip := range []float64{-1, 0} {
		y := make([]float64, n)
		for i := range y {
			y[i] = line(i)
		}
		z, _, err := AsLS(y, AsLSOptions{Lambda: 1e6, Asymmetry: 0.01, MaxIter: 50, Clip: clip})
		if err != nil {
			t.Fatal(err)
		}
		for i := range z {
			if e := relErr(z[i], y[i]); e > 1e-9 {
				t.Fatalf("clip %g: line z[%d] = %.15g, want %.15g", clip, i, z[i], y[i])
			}
		}
		for i := range y {
			y[i] += Gaussian(float64(i), 40, 1000, 15)
		}
		z, _, err = AsLS(y, AsLSOptions{Lambda: 1e6, Asymmetry: 0.01, MaxIter: 50, Clip: clip})
		if err != nil {
			t.Fatal(err)
		}
		for i := 955; i <= 1045; i++ { // ±3σ
			if !(z[i] < y[i]) || math.Abs(z[i]-line(i)) > 0.03*math.Abs(line(i)) {
				t.Errorf("clip %g: under the peak z[%d] = %g, data %g, true baseline %g", clip, i, z[i], y[i], line(i))
				break
			}
		}
	}
}

func TestAsLSOneIterationIsWhittaker(t *testing.T) {
	// The first textbook AsLS solve uses unit weights (Eilers & Boelens 2005,
	// as summarised in check-values.md §9), so MaxIter 1 gives the Whittaker
	// smoother with unit weights.
	y, _, _, _, _ := purityTrace(3000, 6, 4, 5)
	z, it, err := AsLS(y, AsLSOptions{Lambda: 1e5, Asymmetry: 0.01, MaxIter: 1, Clip: -1})
	if err != nil || it != 1 {
		t.Fatalf("iterations %d, error %v", it, err)
	}
	w := make([]float64, len(y))
	for i := range w {
		w[i] = 1
	}
	want := make([]float64, len(y))
	if err := Whittaker(y, w, 1e5, want); err != nil {
		t.Fatal(err)
	}
	for i := range z {
		if relErr(z[i], want[i]) > 1e-12 {
			t.Fatalf("AsLS with MaxIter 1: z[%d] = %.15g, unit-weight Whittaker %.15g", i, z[i], want[i])
		}
	}
}

func TestAsLSCurvedBaselineWithPeaks(t *testing.T) {
	// A slow exponential drift plus a gentle quadratic, several Gaussian and
	// EMG peaks (8 to 2000 noise SDs) and unit noise. With clipping the
	// baseline must follow the truth within a small multiple of σ
	// everywhere, under the peaks too, after allowing for the offset e(p)·σ
	// at which asymmetric least squares settles (the p-expectile of the
	// noise, see TestNormalExpectile; common practice for AsLS).
	const n = 12000
	rng := newRNGSplitMix(21)
	y := make([]float64, n)
	base := make([]float64, n)
	for i := range y {
		x := float64(i)
		u := x/n - 0.4
		base[i] = 200 + 60*math.Exp(-x/2500) + 150*u*u
		y[i] = base[i] + rng.normal() +
			Gaussian(x, 2000, 1500, 8) + Gaussian(x, 8, 2600, 6) +
			EMG(x, 6000, 4000, 10, 12) + EMG(x, 400, 4100, 10, 12) +
			Gaussian(x, 300, 7000, 20) + EMG(x, 30000, 9500, 7, 20) +
			Gaussian(x, 25, 11000, 9)
	}
	for _, p := range []float64{0.001, 0.01, 0.1} {
		z, it, err := AsLS(y, AsLSOptions{Lambda: 1e7, Asymmetry: p, MaxIter: 100})
		if err != nil {
			t.Fatal(err)
		}
		off := normalExpectile(p)
		var worst float64
		for i := range z {
			worst = math.Max(worst, math.Abs(z[i]-base[i]-off))
		}
		t.Logf("p %g: %d iterations, worst deviation from truth + e(p)σ %.2fσ", p, it, worst)
		if worst > 1.5 {
			t.Errorf("p %g: baseline off the truth + e(p)σ by up to %.2fσ (%d iterations)", p, worst, it)
		}
	}
}

func TestAsLSPurity(t *testing.T) {
	// The solvent-purity case: a main peak of 99.6 area %, 1e5 noise SDs
	// high, with impurities of 0.01–0.2 area % on its flanks and elsewhere.
	// With clipping the baseline stays within 3σ of the truth over ±5 widths
	// at half height of the main peak and never rises above the data where
	// the main peak stands out of the noise. Textbook AsLS (Clip < 0) is
	// pulled up under the peak by tens of σ and digs a trench beside it:
	// the failure clipping exists to fix (Eilers & Boelens' weights
	// p·r² cannot ignore a 1e5σ peak; common practice).
	y, base, apex, w50, main := purityTrace(12000, 6, 4, 1)
	for _, p := range []float64{0.001, 0.01} {
		off := normalExpectile(p)
		// near returns the largest deviation from the true baseline over ±5
		// widths at half height, the same after allowing for the expectile
		// offset, and the number of points under the main peak where the
		// baseline is not below the data.
		near := func(clip float64) (worst, centred float64, above int) {
			z, _, err := AsLS(y, AsLSOptions{Lambda: 1e7, Asymmetry: p, MaxIter: 100, Clip: clip})
			if err != nil {
				t.Fatal(err)
			}
			for i := range y {
				if math.Abs(float64(i)-apex) <= 5*w50 {
					worst = math.Max(worst, math.Abs(z[i]-base[i]))
					centred = math.Max(centred, math.Abs(z[i]-base[i]-off))
				}
				if main[i] > 10 && z[i] >= y[i] {
					above++
				}
			}
			return worst, centred, above
		}
		robust, centred, above := near(0)
		textbook, _, _ := near(-1)
		t.Logf("p %g: worst deviation near the main peak %.2fσ clipped (%.2fσ from truth + e(p)σ), %.2fσ textbook", p, robust, centred, textbook)
		if robust > 3 || centred > 0.5 || above > 0 {
			t.Errorf("p %g, clipped: baseline off by up to %.2fσ near the main peak (%.2fσ from truth + e(p)σ), not below the data at %d points under it", p, robust, centred, above)
		}
		if textbook < 10 || textbook < 5*robust {
			t.Errorf("p %g: textbook AsLS off by only %.2fσ near the main peak (clipped %.2fσ); the purity case no longer shows its failure", p, textbook, robust)
		}
	}
}

func TestAsLSOptionsErrors(t *testing.T) {
	y := []float64{1, 2, 3, 4, 5}
	good := AsLSOptions{Lambda: 1e5, Asymmetry: 0.01, MaxIter: 10}
	for _, c := range []struct {
		name      string
		y         []float64
		mod       func(*AsLSOptions)
		substring string
	}{
		{"lambda", y, func(o *AsLSOptions) { o.Lambda = 0 }, "lambda must be positive and finite, got 0"},
		{"asymmetry zero", y, func(o *AsLSOptions) { o.Asymmetry = 0 }, "asymmetry must lie strictly between 0 and 0.5, got 0"},
		{"asymmetry half", y, func(o *AsLSOptions) { o.Asymmetry = 0.5 }, "strictly between 0 and 0.5"},
		{"iterations", y, func(o *AsLSOptions) { o.MaxIter = 0 }, "at least 1, got 0"},
		{"tolerance", y, func(o *AsLSOptions) { o.Tol = -1 }, "tolerance must be finite and non-negative"},
		{"clip", y, func(o *AsLSOptions) { o.Clip = math.NaN() }, "clip level must be finite"},
		{"short", y[:2], func(*AsLSOptions) {}, "trace of 2 points is too short"},
		{"infinite data", []float64{1, math.Inf(1), 3}, func(*AsLSOptions) {}, "data point 1 is +Inf"},
	} {
		o := good
		c.mod(&o)
		_, _, err := AsLS(c.y, o)
		if err == nil || !strings.Contains(err.Error(), c.substring) {
			t.Errorf("%s: error %v, want it to mention %q", c.name, err, c.substring)
		}
	}
}

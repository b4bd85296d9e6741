package dsp

import (
	"fmt"
	"math"
	"testing"
)

// splitmix is a tiny deterministic generator (splitmix64) for synthetic
// noise in tests.
type splitmix struct{ s uint64 }

func (r *splitmix) next() uint64 {
	r.s += 0x9e3779b97f4a7c15
	z := r.s
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// normal returns a standard normal deviate by the Box–Muller transform.
func (r *splitmix) normal() float64 {
	u1 := (float64(r.next()>>11) + 0.5) / (1 << 53) // in (0, 1)
	u2 := float64(r.next()>>11) / (1 << 53)
	return math.Sqrt(-2*math.Log(u1)) * math.Cos(2*math.Pi*u2)
}

// patterned returns n points of a straight line plus the repeated pattern
// (a, −a, −a, a). Over any whole number of repeats that start at a multiple
// of 4, the pattern is orthogonal to a constant and to the index, so the
// least-squares line is the line itself and the residuals are exactly ±a:
// SD a·√(m/(m−2)) over m points, range 2a (least squares, derived).
func patterned(n int, a, c0, c1 float64) []float64 {
	y := make([]float64, n)
	sign := [4]float64{1, -1, -1, 1}
	for i := range y {
		y[i] = c0 + c1*float64(i) + a*sign[i%4]
	}
	return y
}

func TestNoiseWindowDetrends(t *testing.T) {
	for _, tc := range []struct {
		name   string
		y      []float64
		sd, pp float64
	}{
		// Least squares removes any straight line exactly (derived).
		{"line", patterned(40, 0, 3, -0.25), 0, 0},
		{"pattern on a line", patterned(400, 0.5, 100, 0.02), 0.5 * math.Sqrt(400.0/398), 1},
		{"pattern on a steep line", patterned(1200, 2, -7, 1e3), 2 * math.Sqrt(1200.0/1198), 4},
		{"too short", []float64{1, 5}, 0, 0},
	} {
		t.Run(tc.name, func(t *testing.T) {
			sd, pp := NoiseWindow(tc.y)
			if math.Abs(sd-tc.sd) > 1e-9*(1+tc.sd) || math.Abs(pp-tc.pp) > 1e-9*(1+tc.pp) {
				t.Errorf("NoiseWindow = (%g, %g), want (%g, %g)", sd, pp, tc.sd, tc.pp)
			}
		})
	}
}

func TestNoiseBlocksIgnoresPeaks(t *testing.T) {
	// Ten blocks of 400 points with residuals ±0.5 (see patterned), some of
	// which carry a Gaussian peak. The results are those of the quiet
	// points: range 1 and SD 0.5·√(m/(m−2)) for m quiet points in a block
	// (derived), so between the values for m = 400 and m = 200 (a block
	// counts only when at least half of it is quiet).
	sd400, sd200 := 0.5*math.Sqrt(400.0/398), 0.5*math.Sqrt(200.0/198)
	every := make([]float64, 10)
	for k := range every {
		every[k] = 170 + 400*float64(k)
	}
	for _, tc := range []struct {
		name  string
		peaks []float64 // centres, in points
		sigma float64   // peak SD, in points
	}{
		{"none", nil, 20},
		{"four of ten, on block edges", []float64{800, 1200, 3300}, 20},
		{"seven of ten", []float64{600, 1000, 1400, 2200, 2600, 3400, 3800}, 20},
		{"narrow ones in every block", every, 4},
	} {
		t.Run(tc.name, func(t *testing.T) {
			y := patterned(4000, 0.5, 10, 0.001)
			for i := range y {
				for k, c := range tc.peaks {
					y[i] += Gaussian(float64(i), 40+100*float64(k), c, tc.sigma)
				}
			}
			sd, pp := NoiseBlocks(y, 400)
			if sd < sd400-1e-9 || sd > sd200+1e-9 || math.Abs(pp-1) > 1e-9 {
				t.Errorf("NoiseBlocks = (%.9g, %g), want SD in [%.9g, %.9g] and range 1", sd, pp, sd400, sd200)
			}
		})
	}
}

func TestNoiseBlocksShortSeries(t *testing.T) {
	// Fewer points than one block: the whole series is one block.
	y := patterned(200, 0.25, 1, 0.5)
	sd, pp := NoiseBlocks(y, 1200)
	wsd, wpp := NoiseWindow(y)
	if sd != wsd || pp != wpp {
		t.Errorf("NoiseBlocks on a short series = (%g, %g), want NoiseWindow's (%g, %g)", sd, pp, wsd, wpp)
	}
}

func TestNoiseSpans(t *testing.T) {
	// A quiet series with residuals ±0.5 except a huge step inside
	// [1000, 1400), which the spans leave out.
	y := patterned(4000, 0.5, 0, 0)
	for i := 1000; i < 1400; i++ {
		y[i] += 1e6
	}
	// Every block below starts at a multiple of 4 and holds whole pattern
	// repeats, so its SD is 0.5·√(m/(m−2)) for m points (see patterned).
	sd400 := 0.5 * math.Sqrt(400.0/398)
	sd1300 := 0.5 * math.Sqrt(1300.0/1298)
	for _, tc := range []struct {
		name  string
		spans []Span
		sd    float64
	}{
		// Blocks of 1000 and 2 × 1300 points; the median is a 1300 one.
		{"both sides", []Span{{0, 1000}, {1400, 4000}}, sd1300},
		// [0, 400) is shorter than a block and left out.
		{"clipped to the series", []Span{{-50, 400}, {1400, 9000}}, sd1300},
		{"only short spans: the longest is used", []Span{{0, 40}, {1400, 1800}}, sd400},
		{"empty and reversed spans skipped", []Span{{5, 5}, {900, 100}, {1400, 1800}}, sd400},
	} {
		t.Run(tc.name, func(t *testing.T) {
			sd, pp := NoiseSpans(y, 1000, tc.spans)
			if math.Abs(sd-tc.sd) > 1e-9 || math.Abs(pp-1) > 1e-9 {
				t.Errorf("NoiseSpans = (%g, %g), want (%g, 1)", sd, pp, tc.sd)
			}
		})
	}
	if sd, pp := NoiseSpans(y, 100, nil); sd != 0 || pp != 0 {
		t.Errorf("NoiseSpans with no spans = (%g, %g), want (0, 0)", sd, pp)
	}
}

func TestNoiseBlocksWhiteNoise(t *testing.T) {
	// Gaussian white noise of SD 2 on a drifting line, 36,000 points in
	// blocks of 1200: the median block SD estimates σ (each block SD has a
	// relative standard error near 1/√(2·1200) = 2 %, the median of 30 of
	// them well under 1 %; common practice), and the median range is about
	// 6.5 σ for ~1000 normal samples (from memory), so a loose band is
	// checked.
	for seed := uint64(1); seed <= 3; seed++ {
		rng := splitmix{seed}
		y := make([]float64, 36000)
		for i := range y {
			x := float64(i) / 36000
			y[i] = 50*x + 20*x*x + 2*rng.normal()
		}
		sd, pp := NoiseBlocks(y, 1200)
		if math.Abs(sd/2-1) > 0.03 {
			t.Errorf("seed %d: SD = %g, want 2 within 3 %%", seed, sd)
		}
		if r := pp / 2; r < 5.8 || r > 7.4 {
			t.Errorf("seed %d: range = %g σ, want about 6.5 σ", seed, r)
		}
	}
}

func BenchmarkNoiseBlocks(b *testing.B) {
	for _, n := range []int{36000, 1000000} {
		rng := splitmix{7}
		y := make([]float64, n)
		for i := range y {
			y[i] = rng.normal()
		}
		b.Run(fmt.Sprint(n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				NoiseBlocks(y, 1200)
			}
		})
	}
}

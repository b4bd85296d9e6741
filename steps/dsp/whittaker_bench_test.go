package dsp

import (
	"strconv"
	"testing"
)

// The 36,000-point trace is an hour at 10 Hz with λ = 1e7 and peaks σ = 6,
// τ = 4 points. The 1,000,000-point trace keeps the peak widths in points
// and λ (a run about 28 times longer at the same rate): the same hour
// sampled 28 times faster would need λ·28⁴ ≈ 6e12 for the same stiffness in
// time, beyond what the normal equations resolve in double precision for
// AsLS weights (λ/w above about 1e13).
var aslsBenchCases = []struct {
	n      int
	lambda float64
}{
	{36_000, 1e7},
	{1_000_000, 1e7},
}

func BenchmarkWhittaker(b *testing.B) {
	for _, c := range aslsBenchCases {
		y, _, _, _, _ := purityTrace(c.n, 6, 4, 1)
		w := make([]float64, c.n)
		for i := range w {
			w[i] = 1
		}
		z := make([]float64, c.n)
		b.Run(strconv.Itoa(c.n), func(b *testing.B) {
			for b.Loop() {
				if err := Whittaker(y, w, c.lambda, z); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

func BenchmarkAsLS(b *testing.B) {
	for _, c := range aslsBenchCases {
		y, _, _, _, _ := purityTrace(c.n, 6, 4, 1)
		for _, mode := range []struct {
			name      string
			clip, tol float64
		}{{"clipped", 0, 0}, {"clipped-tol0.05", 0, 0.05}, {"textbook", -1, 0}} {
			b.Run(strconv.Itoa(c.n)+"/"+mode.name, func(b *testing.B) {
				var it int
				for b.Loop() {
					var err error
					_, it, err = AsLS(y, AsLSOptions{Lambda: c.lambda, Asymmetry: 0.01, MaxIter: 100, Clip: mode.clip, Tol: mode.tol})
					if err != nil {
						b.Fatal(err)
					}
				}
				b.ReportMetric(float64(it), "iterations")
			})
		}
	}
}

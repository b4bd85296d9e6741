package dsp

import (
	"math"
	"strconv"
	"testing"
)

func itoa(n int) string { return strconv.Itoa(n) }

// The 36,000-point trace is an hour at 10 Hz with λ = 1e7 and peaks σ = 6,
// τ = 4 points; the 1,000,000-point trace is the same hour sampled k ≈ 27.8
// times faster, so peak widths scale by k and λ by k⁴ for the same baseline
// stiffness in time.
var aslsBenchCases = []struct {
	n      int
	lambda float64
}{
	{36_000, 1e7},
	{1_000_000, 1e7 * math.Pow(1e6/36e3, 4)},
}

func BenchmarkWhittaker(b *testing.B) {
	for _, c := range aslsBenchCases {
		k := float64(c.n) / 36e3
		y, _, _, _, _ := purityTrace(c.n, 6*k, 4*k, 1)
		w := make([]float64, c.n)
		for i := range w {
			w[i] = 1
		}
		z := make([]float64, c.n)
		b.Run(itoa(c.n), func(b *testing.B) {
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
		k := float64(c.n) / 36e3
		y, _, _, _, _ := purityTrace(c.n, 6*k, 4*k, 1)
		for _, mode := range []struct {
			name string
			clip float64
		}{{"clipped", 0}, {"textbook", -1}} {
			b.Run(itoa(c.n)+"/"+mode.name, func(b *testing.B) {
				var it int
				for b.Loop() {
					var err error
					_, it, err = AsLS(y, AsLSOptions{Lambda: c.lambda, Asymmetry: 0.01, MaxIter: 100, Clip: mode.clip})
					if err != nil {
						b.Fatal(err)
					}
				}
				b.ReportMetric(float64(it), "iterations")
			})
		}
	}
}

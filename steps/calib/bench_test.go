package calib

import (
	"fmt"
	"testing"
)

// calibrationSet is n standards from 1 to 100 on a gently curved response
// with a deterministic ±0.5 % ripple standing in for noise.
func calibrationSet(n int) (x, y []float64) {
	x, y = make([]float64, n), make([]float64, n)
	for i := range n {
		x[i] = 1 + 99*float64(i)/float64(n-1)
		y[i] = (0.2 + 12.5*x[i] - 0.004*x[i]*x[i]) * (1 + 0.005*float64(i%7-3)/3)
	}
	return x, y
}

func BenchmarkFitCurve(b *testing.B) {
	for _, n := range []int{5, 40, 36000} {
		x, y := calibrationSet(n)
		for _, m := range []Model{Linear, Quadratic} {
			b.Run(fmt.Sprintf("%s/n=%d", m, n), func(b *testing.B) {
				b.ReportAllocs()
				for b.Loop() {
					if _, err := FitCurve(x, y, m, InverseX); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}

func BenchmarkAmount(b *testing.B) {
	x, y := calibrationSet(6)
	f, err := FitCurve(x, y, Quadratic, Unweighted)
	if err != nil {
		b.Fatal(err)
	}
	b.ReportAllocs()
	for b.Loop() {
		if _, _, err := f.Amount(600); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkSummarise(b *testing.B) {
	for _, n := range []int{6, 36000} {
		v, _ := calibrationSet(n)
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if _, err := Summarise(v); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

func BenchmarkMaxRSD(b *testing.B) {
	b.ReportAllocs()
	for b.Loop() {
		if _, err := MaxRSD(102, 6); err != nil {
			b.Fatal(err)
		}
	}
}

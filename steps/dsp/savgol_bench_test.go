package dsp

import (
	"math"
	"strconv"
	"testing"
)

func benchTrace(n int) []float64 {
	rng := newRNGSplitMix(99)
	y := make([]float64, n)
	for i := range y {
		y[i] = 100 + 50*math.Sin(float64(i)/5000) + rng.normal()
	}
	return y
}

func BenchmarkSGCoefficients(b *testing.B) {
	for b.Loop() {
		if _, err := SGCoefficients(9, 2, 0); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkSavitzkyGolay(b *testing.B) {
	for _, c := range []struct {
		name                 string
		n, window, order, dv int
	}{
		{"36000/9-2-0", 36_000, 9, 2, 0},
		{"36000/21-4-1", 36_000, 21, 4, 1},
		{"1000000/9-2-0", 1_000_000, 9, 2, 0},
		{"1000000/101-4-0", 1_000_000, 101, 4, 0},
	} {
		y := benchTrace(c.n)
		b.Run(c.name, func(b *testing.B) {
			for b.Loop() {
				if _, err := SavitzkyGolay(y, c.window, c.order, c.dv, 0.1); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

func BenchmarkMovingAverage(b *testing.B) {
	for _, n := range []int{36_000, 1_000_000} {
		y := benchTrace(n)
		b.Run(strconv.Itoa(n), func(b *testing.B) {
			for b.Loop() {
				if _, err := MovingAverage(y, 21); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

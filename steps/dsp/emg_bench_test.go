package dsp

import (
	"strconv"
	"testing"
)

func BenchmarkEMG(b *testing.B) {
	for _, n := range []int{36_000, 1_000_000} {
		out := make([]float64, n)
		b.Run(strconv.Itoa(n), func(b *testing.B) {
			for b.Loop() {
				for i := range out {
					out[i] = EMG(float64(i), 1e4, float64(n)/2, float64(n)/6000, float64(n)/4000)
				}
			}
		})
	}
}

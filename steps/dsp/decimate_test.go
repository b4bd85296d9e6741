package dsp

import (
	"math"
	"testing"
)

func TestBlockMeansExpandLinear(t *testing.T) {
	// A straight line survives BlockMeans then ExpandLinear exactly
	// (the mean of a block of a line is the line at the block's centre;
	// common practice), including a short last block.
	for _, c := range []struct{ n, k int }{{100, 10}, {103, 10}, {7, 1}, {5, 8}, {36001, 9}} {
		y := make([]float64, c.n)
		for i := range y {
			y[i] = 2.5 - 0.125*float64(i)
		}
		z := BlockMeans(y, c.k)
		if len(z) != (c.n+c.k-1)/c.k {
			t.Fatalf("n %d k %d: %d blocks", c.n, c.k, len(z))
		}
		back, err := ExpandLinear(z, c.k, c.n)
		if err != nil {
			t.Fatal(err)
		}
		for i, v := range back {
			if len(z) > 1 && math.Abs(v-y[i]) > 1e-9 {
				t.Fatalf("n %d k %d: point %d is %g, want %g", c.n, c.k, i, v, y[i])
			}
		}
	}
	if _, err := ExpandLinear([]float64{1, 2}, 10, 100); err == nil {
		t.Error("mismatched sizes must be an error")
	}
}

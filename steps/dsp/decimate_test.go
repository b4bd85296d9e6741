package dsp

import (
	"errors"
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

// Centre leaves the baseline alone, and says so, when it cannot measure the
// noise (noise-free data) or the trace is nearly all peak.
func TestCentreSkips(t *testing.T) {
	line := make([]float64, 200)
	for i := range line {
		line[i] = 1 + 0.01*float64(i)
	}
	z := append([]float64(nil), line...)
	if _, err := Centre(line, z, 1e4, 3, 0.01, 20); !errors.Is(err, ErrCentreSkipped) {
		t.Errorf("noise-free: want ErrCentreSkipped, got %v", err)
	}
	for i := range z {
		if z[i] != line[i] {
			t.Fatalf("noise-free: baseline changed at %d", i)
		}
	}
	// A trace that is one broad peak over its whole length, with noise.
	peak := make([]float64, 200)
	flat := make([]float64, 200)
	for i := range peak {
		x := float64(i-100) / 40
		peak[i] = 100*math.Exp(-x*x/2) + 0.01*math.Sin(float64(i)*1.7)
	}
	if _, err := Centre(peak, flat, 1e4, 3, 0.01, 20); err != nil && !errors.Is(err, ErrCentreSkipped) {
		t.Errorf("all peak: want success or ErrCentreSkipped, got %v", err)
	}
}

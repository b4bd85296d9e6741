package dsp

import "fmt"

// BlockMeans returns the means of consecutive blocks of k points of y; the
// last block may be shorter. k = 1 returns a copy.
func BlockMeans(y []float64, k int) []float64 {
	if k < 1 {
		k = 1
	}
	out := make([]float64, 0, (len(y)+k-1)/k)
	for i := 0; i < len(y); i += k {
		j := min(i+k, len(y))
		s := 0.0
		for _, v := range y[i:j] {
			s += v
		}
		out = append(out, s/float64(j-i))
	}
	return out
}

// ExpandLinear is the inverse of BlockMeans for a smooth series: z holds one
// value per block of k points of a series of n points, placed at the block's
// centre; the result interpolates linearly between the centres and
// extrapolates the first and last segments to the ends.
func ExpandLinear(z []float64, k, n int) ([]float64, error) {
	if k < 1 || len(z) != (n+k-1)/k {
		return nil, fmt.Errorf("expand: %d block values do not fit %d points in blocks of %d", len(z), n, k)
	}
	out := make([]float64, n)
	if len(z) == 1 {
		for i := range out {
			out[i] = z[0]
		}
		return out, nil
	}
	centre := func(b int) float64 {
		lo := b * k
		hi := min(lo+k, n)
		return float64(lo+hi-1) / 2
	}
	b := 0
	for i := range out {
		x := float64(i)
		for b < len(z)-2 && x > centre(b+1) {
			b++
		}
		c0, c1 := centre(b), centre(b+1)
		f := (x - c0) / (c1 - c0)
		out[i] = z[b] + f*(z[b+1]-z[b])
	}
	return out, nil
}

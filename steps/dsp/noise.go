package dsp

import (
	"math"
	"slices"
)

// Span is the half-open index range [Lo, Hi) of a series.
type Span struct{ Lo, Hi int }

// NoiseBlocks estimates the background noise of a baseline-corrected signal.
// It is NoiseSpans over the whole of y.
func NoiseBlocks(y []float64, block int) (sd, peakToPeak float64) {
	return NoiseSpans(y, block, []Span{{0, len(y)}})
}

// NoiseSpans estimates the background noise of a baseline-corrected signal
// from the stretches of y named by spans (clipped to y; out-of-range or empty
// spans are skipped).
//
// Each span of at least block points is cut into ⌊len/block⌋ consecutive
// blocks of equal length (within one point), so that no point is left over.
// A least-squares straight line is removed from every block; the block's SD
// (residual sum of squares over n−2) and range (max − min of the residuals)
// are computed, and the medians over all blocks are returned. The medians
// ignore the minority of blocks that hold a peak. Spans shorter than block
// are left out, unless no span reaches block points: then the longest span
// is one block on its own. Both results are 0 when nothing is left to
// measure (fewer than three points). block values below 3 count as 3.
func NoiseSpans(y []float64, block int, spans []Span) (sd, peakToPeak float64) {
	block = max(block, 3)
	var sds, ranges []float64
	longest := Span{}
	for _, s := range spans {
		s.Lo, s.Hi = max(s.Lo, 0), min(s.Hi, len(y))
		n := s.Hi - s.Lo
		if n > longest.Hi-longest.Lo {
			longest = s
		}
		nb := n / block
		for b := range nb {
			lo, hi := s.Lo+b*n/nb, s.Lo+(b+1)*n/nb
			d, r := detrendedStats(y[lo:hi])
			sds, ranges = append(sds, d), append(ranges, r)
		}
	}
	if len(sds) == 0 {
		return NoiseWindow(y[longest.Lo:longest.Hi])
	}
	return median(sds), median(ranges)
}

// NoiseWindow measures the noise of one quiet stretch of a signal: the SD
// (residual sum of squares over n−2) and the range (max − min) of y after
// removing its least-squares straight line. Both are 0 for fewer than three
// points.
func NoiseWindow(y []float64) (sd, peakToPeak float64) {
	return detrendedStats(y)
}

// detrendedStats returns the SD and range of y about its least-squares line
// over the index.
func detrendedStats(y []float64) (sd, rng float64) {
	n := len(y)
	if n < 3 {
		return 0, 0
	}
	// Centred abscissa x = i − c: the slope is Σx·y/Σx² and the intercept
	// the mean, with no cancellation for long blocks.
	c := float64(n-1) / 2
	var sy, sxy float64
	for i, v := range y {
		sy += v
		sxy += (float64(i) - c) * v
	}
	fn := float64(n)
	mean := sy / fn
	slope := sxy / (fn * (fn*fn - 1) / 12) // Σx² = n(n²−1)/12
	var ss float64
	lo, hi := math.Inf(1), math.Inf(-1)
	for i, v := range y {
		r := v - mean - slope*(float64(i)-c)
		ss += r * r
		lo, hi = min(lo, r), max(hi, r)
	}
	return math.Sqrt(ss / (fn - 2)), hi - lo
}

// median returns the median of x (the mean of the two middle values for an
// even count); x is reordered.
func median(x []float64) float64 {
	slices.Sort(x)
	n := len(x)
	if n%2 == 1 {
		return x[n/2]
	}
	return (x[n/2-1] + x[n/2]) / 2
}

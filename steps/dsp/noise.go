package dsp

import (
	"cmp"
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
// A least-squares straight line is removed from every block, and the
// block's SD (residual sum of squares over m−2 for m points) and range
// (max − min of the residuals) are computed. Blocks that hold a peak have a
// larger SD than the noise-only ones, which cluster tightly (the relative
// standard error of an SD is about 1/√(2(m−2))). So the quiet blocks are
// those whose SD is at most q·(1 + 4/√(2(block−2))), q being the lower
// quartile of all block SDs, and the results are the medians of the quiet
// blocks' SDs and ranges. This stays right while up to three blocks in four
// hold a peak, where a plain median would fail past one in two.
//
// Spans shorter than block are left out, unless no span reaches block
// points: then the longest span is one block on its own. Both results are 0
// when nothing is left to measure (fewer than three points). block values
// below 3 count as 3.
func NoiseSpans(y []float64, block int, spans []Span) (sd, peakToPeak float64) {
	block = max(block, 3)
	var stats []blockStat
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
			stats = append(stats, blockStat{d, r})
		}
	}
	if len(stats) == 0 {
		return NoiseWindow(y[longest.Lo:longest.Hi])
	}
	slices.SortFunc(stats, func(a, b blockStat) int { return cmp.Compare(a.sd, b.sd) })
	limit := stats[(len(stats)-1)/4].sd * (1 + 4/math.Sqrt(2*float64(block-2)))
	quiet := 1
	for quiet < len(stats) && stats[quiet].sd <= limit {
		quiet++
	}
	sds := make([]float64, quiet)
	ranges := make([]float64, quiet)
	for i, st := range stats[:quiet] {
		sds[i], ranges[i] = st.sd, st.rng
	}
	return median(sds), median(ranges)
}

// blockStat holds the detrended SD and range of one noise block.
type blockStat struct{ sd, rng float64 }

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

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
// Blocks. Each span of at least block points is cut into ⌊len/block⌋
// consecutive blocks of equal length (within one point), so that no point
// is left over. Spans shorter than block are left out, unless no span
// reaches block points: then the longest span is one block on its own.
// block values below 3 count as 3.
//
// Screening. Peaks must not count as noise, and in a busy chromatogram most
// blocks may touch a peak, so each block is cut into sub-blocks of about a
// tenth of a block (at least 10 points; a block shorter than 20 points is
// one sub-block). Each sub-block's detrended SD (see below) is computed.
// Noise-only sub-blocks cluster tightly (the relative standard error of an
// SD over m points is about 1/√(2(m−2))), while those holding a peak lie
// far above. A sub-block is quiet when its SD is at most
// q·(1 + 4/√(2(m−2))), q being the lower quartile of all sub-block SDs, and
// both its neighbours in the block are quiet too, so that the tails beside
// a peak stay out. The reference q stays right while up to about three
// quarters of the sub-blocks hold a peak.
//
// Statistics. In every block with at least half its sub-blocks quiet, a
// least-squares straight line is fitted to the quiet points and removed;
// the block's SD is the residual sum of squares over n−2 (n quiet points)
// and its range the max − min of those residuals. The results are the
// medians of these SDs and ranges over the blocks. When no block qualifies,
// every block counts in full. Both results are 0 when nothing is left to
// measure (fewer than three points).
func NoiseSpans(y []float64, block int, spans []Span) (sd, peakToPeak float64) {
	block = max(block, 3)
	var blocks []Span
	longest := Span{}
	for _, s := range spans {
		s.Lo, s.Hi = max(s.Lo, 0), min(s.Hi, len(y))
		n := s.Hi - s.Lo
		if n > longest.Hi-longest.Lo {
			longest = s
		}
		nb := n / block
		for b := range nb {
			blocks = append(blocks, Span{s.Lo + b*n/nb, s.Lo + (b+1)*n/nb})
		}
	}
	if len(blocks) == 0 {
		return NoiseWindow(y[longest.Lo:longest.Hi])
	}

	// Sub-blocks of every block, in order, with their detrended SDs.
	sub := max(block/10, 10)
	if block < 2*sub {
		sub = block
	}
	var subs []Span
	first := make([]int, len(blocks)+1) // block b owns subs[first[b]:first[b+1]]
	for b, bl := range blocks {
		first[b] = len(subs)
		n := bl.Hi - bl.Lo
		ns := max(n/sub, 1)
		for k := range ns {
			subs = append(subs, Span{bl.Lo + k*n/ns, bl.Lo + (k+1)*n/ns})
		}
	}
	first[len(blocks)] = len(subs)
	subSD := make([]float64, len(subs))
	for k, sp := range subs {
		subSD[k], _ = detrendedStats(y[sp.Lo:sp.Hi])
	}
	sorted := slices.Clone(subSD)
	slices.Sort(sorted)
	limit := sorted[(len(sorted)-1)/4] * (1 + 4/math.Sqrt(2*float64(max(sub-2, 1))))
	quiet := make([]bool, len(subs))
	for b := range blocks {
		for k := first[b]; k < first[b+1]; k++ {
			quiet[k] = subSD[k] <= limit &&
				(k == first[b] || subSD[k-1] <= limit) &&
				(k+1 == first[b+1] || subSD[k+1] <= limit)
		}
	}

	var sds, ranges []float64
	for b := range blocks {
		nq, ns := 0, first[b+1]-first[b]
		for k := first[b]; k < first[b+1]; k++ {
			if quiet[k] {
				nq++
			}
		}
		var d, r float64
		switch {
		case 2*nq < ns:
			continue
		case nq == ns:
			d, r = detrendedStats(y[blocks[b].Lo:blocks[b].Hi])
		default:
			d, r = quietStats(y, subs[first[b]:first[b+1]], quiet[first[b]:first[b+1]])
		}
		sds, ranges = append(sds, d), append(ranges, r)
	}
	if len(sds) == 0 {
		for _, bl := range blocks {
			d, r := detrendedStats(y[bl.Lo:bl.Hi])
			sds, ranges = append(sds, d), append(ranges, r)
		}
	}
	return median(sds), median(ranges)
}

// quietStats returns the SD (residual sum of squares over n−2) and range of
// the points of the quiet sub-blocks about their least-squares line.
func quietStats(y []float64, subs []Span, quiet []bool) (sd, rng float64) {
	// The line is fitted in x = i − c, c the block's first index, with the
	// means removed, so no sum grows with the square of an index.
	c := subs[0].Lo
	var n, sx, sy float64
	for k, sp := range subs {
		if quiet[k] {
			for i := sp.Lo; i < sp.Hi; i++ {
				n++
				sx += float64(i - c)
				sy += y[i]
			}
		}
	}
	if n < 3 {
		return 0, 0
	}
	mx, my := sx/n, sy/n
	var sxx, sxy float64
	for k, sp := range subs {
		if quiet[k] {
			for i := sp.Lo; i < sp.Hi; i++ {
				dx := float64(i-c) - mx
				sxx += dx * dx
				sxy += dx * (y[i] - my)
			}
		}
	}
	slope := sxy / sxx
	var ss float64
	lo, hi := math.Inf(1), math.Inf(-1)
	for k, sp := range subs {
		if quiet[k] {
			for i := sp.Lo; i < sp.Hi; i++ {
				r := y[i] - my - slope*(float64(i-c)-mx)
				ss += r * r
				if r < lo {
					lo = r
				}
				if r > hi {
					hi = r
				}
			}
		}
	}
	return math.Sqrt(ss / (n - 2)), hi - lo
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
		if r < lo {
			lo = r
		}
		if r > hi {
			hi = r
		}
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

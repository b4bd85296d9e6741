package dsp

import "math"

// System-suitability constants for a peak measured at half height.
const (
	// PlatesPharmacopoeia is the rounded 5.54 of N = 5.54·(tR/wh)².
	PlatesPharmacopoeia = 5.54
	// PlatesExact is 8·ln 2, the value for which the half-height formula
	// equals N = 16·(tR/Wb)² on a Gaussian peak.
	PlatesExact = 8 * math.Ln2
	// ResolutionPharmacopoeia is the rounded 1.18 of Rs = 1.18·Δt/(wh1 + wh2).
	ResolutionPharmacopoeia = 1.18
	// ResolutionExact is √(2·ln 2), the value for which the half-height
	// formula equals Rs = 2·Δt/(Wb1 + Wb2) on Gaussian peaks.
	ResolutionExact = 1.1774100225154747
)

// Apex returns the vertex of the parabola through (i−1, y[i−1]), (i, y[i]),
// (i+1, y[i+1]): its position as a fractional index and its height. When i
// has no neighbour on one side, or y[i] is not a local maximum of the three
// with negative curvature, it returns (i, y[i]).
func Apex(y []float64, i int) (pos, height float64) {
	if i <= 0 || i >= len(y)-1 {
		return float64(i), y[i]
	}
	a, b, c := y[i-1], y[i], y[i+1]
	curv := a - 2*b + c
	if !(curv < 0) || a > b || c > b {
		return float64(i), b
	}
	d := (a - c) / (2 * curv) // in [−½, ½] since b ≥ a and b ≥ c
	return float64(i) + d, b - (a-c)*d/4
}

// Crossings returns where y falls to level on either side of the sample apex,
// as fractional indices: searching outward from apex, the first sample at or
// below level on each side, interpolated linearly with its inner neighbour.
// The search stays within [start, end]; ok is false when y does not fall to
// level inside those bounds on both sides (a peak cut by a perpendicular
// drop above that level, say) or y[apex] is not above level.
func Crossings(y []float64, apex, start, end int, level float64) (left, right float64, ok bool) {
	start, end = max(start, 0), min(end, len(y)-1)
	if apex < start || apex > end || !(y[apex] > level) {
		return 0, 0, false
	}
	i := apex - 1
	for i >= start && y[i] > level {
		i--
	}
	j := apex + 1
	for j <= end && y[j] > level {
		j++
	}
	if i < start || j > end {
		return 0, 0, false
	}
	// y[i] ≤ level < y[i+1] and y[j−1] > level ≥ y[j].
	left = float64(i) + (level-y[i])/(y[i+1]-y[i])
	right = float64(j-1) + (y[j-1]-level)/(y[j-1]-y[j])
	return left, right, true
}

// PlateNumber returns c·(rt/wHalf)², the plate number from the half-height
// width wHalf (same unit as rt), with c = PlatesPharmacopoeia or PlatesExact.
// It returns 0 when wHalf is not positive.
func PlateNumber(rt, wHalf, c float64) float64 {
	if !(wHalf > 0) {
		return 0
	}
	q := rt / wHalf
	return c * q * q
}

// Resolution returns c·(t2−t1)/(w1+w2) for two peaks at retention times t1
// and t2 with half-height widths w1 and w2, with c = ResolutionPharmacopoeia
// or ResolutionExact. It returns 0 when either width is not positive.
func Resolution(t1, t2, w1, w2, c float64) float64 {
	if !(w1 > 0 && w2 > 0) {
		return 0
	}
	return c * (t2 - t1) / (w1 + w2)
}

// Symmetry returns the symmetry (tailing) factor w5/(2·lead), where w5 is
// the width at 5 % of the height and lead the distance from the leading edge
// to the apex at that height. It returns 0 when either is not positive.
func Symmetry(w5, lead float64) float64 {
	if !(w5 > 0 && lead > 0) {
		return 0
	}
	return w5 / (2 * lead)
}

// SignalToNoise returns 2·height/noiseRange, with noiseRange the range h of
// the background noise. It returns 0 when noiseRange is not positive.
func SignalToNoise(height, noiseRange float64) float64 {
	if !(noiseRange > 0) {
		return 0
	}
	return 2 * height / noiseRange
}

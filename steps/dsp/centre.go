package dsp

import (
	"errors"
	"fmt"
	"math"
)

// ErrCentreSkipped says that Centre could not centre the baseline and left
// it as it was.
var ErrCentreSkipped = errors.New("centre: baseline not centred")

// Centre moves a baseline z from the lower edge of the noise to its middle.
//
// AsLS, like every asymmetric fit, leaves its baseline near the lower edge
// of the noise band (for small p one to three noise SDs below the centre),
// because points below it weigh 1 − p and points above it only p. Peak
// boundaries found where the corrected signal returns to the noise level,
// and the areas of trace impurities, are then biased: the offset is summed
// over the whole width of every peak. Centre fixes that with a symmetric,
// clipped Whittaker fit started from z: every point more than Clip·σ above
// the current baseline is signal and gets weight 0, and so do the points
// beside each such run out to half the run's length on either side (a
// peak's tails, which are below Clip·σ but still signal and would otherwise
// lift the baseline under every cluster of small peaks); every other point
// gets weight 1, so noise above and below counts alike. The fit is
// repeated until no weight changes, the baseline moves by at most tol·σ
// (tol > 0), or maxIter fits were made. σ is 1.4826 times the median
// absolute deviation of the residuals y − z of the starting baseline: unlike
// a first-difference estimate it stays right for smoothed (correlated)
// data, and the peaks, a minority of the points, do not move it. z is
// updated in place; the number of fits is returned.
//
// When the noise cannot be measured (σ = 0: noise-free data) or fewer than
// one point in twenty is left outside the signal (a trace that is nearly
// all peak), Centre stops, leaves z as its last fit and returns
// ErrCentreSkipped: the caller keeps the baseline it has.
func Centre(y, z []float64, lambda, clip, tol float64, maxIter int) (int, error) {
	n := len(y)
	if len(z) != n {
		return 0, fmt.Errorf("centre: %d data points but a baseline of %d", n, len(z))
	}
	if n < 3 {
		return 0, fmt.Errorf("centre: a trace of %d points is too short (need at least 3)", n)
	}
	if !(clip > 0) || !(lambda > 0) || maxIter < 1 {
		return 0, fmt.Errorf("centre: clip (%g) and lambda (%g) must be positive and maxIter (%d) at least 1", clip, lambda, maxIter)
	}
	var s bandSolver
	s.resize(n)
	sigma := residualSD(y, z, s.e)
	if !(sigma > 0) {
		return 0, fmt.Errorf("%w: the residuals show no noise", ErrCentreSkipped)
	}
	limit := clip * sigma
	var prev []float64
	if tol > 0 {
		prev = make([]float64, n)
	}
	w := make([]float64, n)
	for i := range w {
		w[i] = -1 // no weight assigned yet
	}
	signal := make([]bool, n)
	fits := 0
	for fits < maxIter {
		markSignal(y, z, limit, signal)
		changed, positive := 0, 0
		for i, sig := range signal {
			wi := 0.0
			if !sig {
				wi = 1
				positive++
			}
			if wi != w[i] {
				w[i] = wi
				changed++
			}
		}
		if changed == 0 {
			break
		}
		if positive < max(2, n/20) {
			return fits, fmt.Errorf("%w: only %d of %d points lie in the noise band", ErrCentreSkipped, positive, n)
		}
		if prev != nil {
			copy(prev, z)
		}
		if err := s.solve(y, w, lambda, z); err != nil {
			return fits, err
		}
		fits++
		if prev != nil {
			move := 0.0
			for i, v := range z {
				move = max(move, math.Abs(v-prev[i]))
			}
			if move <= tol*sigma {
				break
			}
		}
	}
	return fits, nil
}

// markSignal sets signal[i] for every point more than limit above z, and
// for the points beside each run of them out to half the run's length
// (at least one point) on either side.
func markSignal(y, z []float64, limit float64, signal []bool) {
	n := len(y)
	clear(signal)
	for i := 0; i < n; {
		if y[i]-z[i] <= limit {
			i++
			continue
		}
		j := i
		for j < n && y[j]-z[j] > limit {
			j++
		}
		pad := max(1, (j-i)/2)
		for k := max(0, i-pad); k < min(n, j+pad); k++ {
			signal[k] = true
		}
		i = j
	}
}

// residualSD returns 1.4826·MAD(y − z), using scratch (length ≥ len(y)).
func residualSD(y, z, scratch []float64) float64 {
	r := scratch[:len(y)]
	for i, v := range y {
		r[i] = v - z[i]
	}
	med := medianInPlace(r)
	for i, v := range y {
		r[i] = math.Abs(v - z[i] - med)
	}
	return 1.4826 * medianInPlace(r)
}

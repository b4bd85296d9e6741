package dsp

import "fmt"

// Centre moves a baseline z from the lower edge of the noise to its middle.
//
// AsLS, like every asymmetric fit, leaves its baseline near the lower edge
// of the noise band (for small p one to three noise SDs below the centre),
// because points below it weigh 1 − p and points above it only p. Peak
// boundaries found where the corrected signal returns to the noise level,
// and the areas of trace impurities, are then biased: the offset is summed
// over the whole width of every peak. Centre fixes that with a symmetric,
// clipped Whittaker fit started from z: every point no more than Clip·σ above
// the current baseline gets weight 1 (so noise above and below counts
// alike), every point further above gets 0 (it is signal), and the fit is
// repeated until no weight changes or maxIter fits were made. σ is the same
// robust first-difference noise estimate AsLS uses. z is updated in place;
// the number of fits is returned.
func Centre(y, z []float64, lambda, clip float64, maxIter int) (int, error) {
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
	limit := clip * diffNoiseSD(y, s.e)
	w := make([]float64, n)
	for i := range w {
		w[i] = -1 // no weight assigned yet
	}
	fits := 0
	for fits < maxIter {
		changed, positive := 0, 0
		for i, v := range y {
			wi := 0.0
			if v-z[i] <= limit {
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
		if positive < 2 {
			return fits, fmt.Errorf("centre: fewer than two points lie within %g noise SDs of the baseline", clip)
		}
		if err := s.solve(y, w, lambda, z); err != nil {
			return fits, err
		}
		fits++
	}
	return fits, nil
}

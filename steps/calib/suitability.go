package calib

import (
	"errors"
	"fmt"
	"math"

	"gonum.org/v1/gonum/stat/distuv"
)

// LOD is the ICH Q2 limit of detection 3.3·σ/|S|, in amount units: σ is the
// SD of the response (of blanks, the residual SD of an unweighted
// calibration, or the SD of y-intercepts of regression lines) and S the
// calibration slope. It is +Inf for a zero slope.
func LOD(sigma, slope float64) float64 { return 3.3 * sigma / math.Abs(slope) }

// LOQ is the ICH Q2 limit of quantitation 10·σ/|S|, with σ and S as for
// LOD.
func LOQ(sigma, slope float64) float64 { return 10 * sigma / math.Abs(slope) }

// Stats summarises replicate values.
type Stats struct {
	N    int
	Mean float64
	SD   float64 // sample standard deviation, n − 1 in the denominator
	RSD  float64 // relative standard deviation 100·SD/|Mean|, in %
}

// Summarise returns the count, mean, sample SD and RSD (%) of v. It needs
// at least two finite values and a non-zero mean. The SD is computed in two
// passes with a compensating correction, so that a large common offset does
// not cost digits.
func Summarise(v []float64) (Stats, error) {
	n := len(v)
	if n < 2 {
		return Stats{}, fmt.Errorf("calib: a standard deviation needs at least 2 values, got %d", n)
	}
	sum := 0.0
	for i, x := range v {
		if math.IsNaN(x) || math.IsInf(x, 0) {
			return Stats{}, fmt.Errorf("calib: value %d (%g) is not finite", i+1, x)
		}
		sum += x
	}
	mean := sum / float64(n)
	ss, comp := 0.0, 0.0
	for _, x := range v {
		d := x - mean
		ss += d * d
		comp += d
	}
	ss -= comp * comp / float64(n)
	st := Stats{N: n, Mean: mean, SD: math.Sqrt(max(ss, 0) / float64(n-1))}
	if math.IsInf(mean, 0) || math.IsInf(st.SD, 0) {
		return Stats{}, errors.New("calib: the values overflow floating-point range")
	}
	if mean == 0 {
		return Stats{}, errors.New("calib: the mean is zero, so the RSD is undefined")
	}
	st.RSD = 100 * st.SD / math.Abs(mean)
	return st, nil
}

// studentT90 is the two-sided 90 % Student t quantile (the one-sided 0.95
// quantile) with df degrees of freedom.
func studentT90(df int) float64 {
	return distuv.StudentsT{Mu: 0, Sigma: 1, Nu: float64(df)}.Quantile(0.95)
}

// MaxRSD is the Ph. Eur. 2.2.46 maximum permitted relative standard
// deviation (%) of n replicate injections of a reference solution for an
// assay whose upper limit is upperLimitPercent (for example 102.0):
//
//	RSD_max = K·B·√n / t(90 %, n − 1),  K = (0.6/√2)·t(90 %, 5)/√6,
//
// with B = upperLimitPercent − 100 and t the two-sided 90 % Student t
// quantile, computed here (K = 0.349017…). n must be at least 2 and the
// upper limit above 100 %.
func MaxRSD(upperLimitPercent float64, n int) (float64, error) {
	if n < 2 {
		return 0, fmt.Errorf("calib: the maximum RSD needs at least 2 replicate injections, got %d", n)
	}
	b := upperLimitPercent - 100
	if !(b > 0) || math.IsInf(b, 0) {
		return 0, fmt.Errorf("calib: the upper assay limit must be a finite value above 100 %%, got %g", upperLimitPercent)
	}
	k := 0.6 / math.Sqrt2 * studentT90(5) / math.Sqrt(6)
	return k * b * math.Sqrt(float64(n)) / studentT90(n-1), nil
}

// ResponseFactor is the single-point response factor area/amount of a
// calibration standard. Both must be finite and positive.
func ResponseFactor(area, amount float64) (float64, error) {
	if !(amount > 0) || math.IsInf(amount, 0) {
		return 0, fmt.Errorf("calib: a response factor needs a positive amount, got %g", amount)
	}
	if !(area > 0) || math.IsInf(area, 0) {
		return 0, fmt.Errorf("calib: a response factor needs a positive area, got %g", area)
	}
	return area / amount, nil
}

// Drift is the difference of a check (or bracketing) standard's result
// from its reference value, in % of the reference: 100·(check −
// reference)/reference. The reference must be finite and non-zero, the
// check finite.
func Drift(reference, check float64) (float64, error) {
	if reference == 0 || math.IsNaN(reference) || math.IsInf(reference, 0) {
		return 0, fmt.Errorf("calib: drift needs a finite, non-zero reference, got %g", reference)
	}
	if math.IsNaN(check) || math.IsInf(check, 0) {
		return 0, fmt.Errorf("calib: the check value %g is not finite", check)
	}
	return 100 * (check - reference) / reference, nil
}

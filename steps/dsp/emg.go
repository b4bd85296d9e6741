package dsp

import "math"

// Gaussian returns height·exp(−(t−mu)²/(2·sigma²)). It returns NaN when
// sigma is not positive.
func Gaussian(t, height, mu, sigma float64) float64 {
	if !(sigma > 0) {
		return math.NaN()
	}
	u := (t - mu) / sigma
	return height * math.Exp(-0.5*u*u)
}

// gaussianDensity is the normal density with mean mu and SD sigma, times area.
func gaussianDensity(t, area, mu, sigma float64) float64 {
	return Gaussian(t, area/(sigma*math.Sqrt(2*math.Pi)), mu, sigma)
}

// EMG returns the exponentially modified Gaussian with the given area,
// Gaussian mean mu, Gaussian SD sigma and exponential time constant tau:
//
//	h(t) = (area/(2τ))·exp(σ²/(2τ²) − (t−μ)/τ)·erfc(z),  z = (σ/τ − (t−μ)/σ)/√2.
//
// Its mean is μ+τ and its variance σ²+τ². With tau == 0 it is the Gaussian
// of that area.
//
// For z ≥ 0 it is evaluated in the equivalent form
// (area/(2τ))·exp(−(t−μ)²/(2σ²))·Erfcx(z), where neither factor overflows;
// for z < 0 the defining form is used, whose exponent is then below
// −σ²/(2τ²). A finite result is returned for every finite argument unless
// the true value itself overflows. When τ/σ is below 1e-20 the peak is the
// Gaussian shifted by τ to double precision, and when σ/τ is below 1e-20 it
// is the exponential decay with an erfc onset; both limits are evaluated as
// such.
//
// It returns NaN when sigma is not positive or tau is negative.
func EMG(t, area, mu, sigma, tau float64) float64 {
	if !(sigma > 0) || !(tau >= 0) {
		return math.NaN()
	}
	if area == 0 {
		return 0
	}
	r := tau / sigma
	u := (t - mu) / sigma
	switch {
	case r < 1e-20:
		return gaussianDensity(t, area, mu+tau, sigma)
	case r > 1e20:
		// σ/τ is negligible: the exponential (area/τ)·exp(−(t−μ)/τ) with its
		// onset smoothed by erfc(−u/√2)/2, which underflows for u < −40.
		if u < -40 {
			return 0
		}
		g := math.Exp(-(t-mu)/tau) * math.Erfc(-u/math.Sqrt2)
		return area * (g / 2 / tau)
	}
	z := (1/r - u) / math.Sqrt2
	switch {
	case z >= 1:
		// erfcx(z)/(2τ) = z·erfcx(z)/(√2·σ·(1 − r·u)); z·erfcx(z) is bounded
		// by 1/√π, so a tiny τ cannot overflow an intermediate.
		g := math.Exp(-0.5*u*u) * zErfcx(z)
		return area * g / (math.Sqrt2 * sigma * (1 - r*u))
	case z >= 0:
		g := math.Exp(-0.5*u*u) * Erfcx(z)
		return area * (g / 2 / tau)
	default:
		g := math.Exp(0.5/(r*r)-u/r) * math.Erfc(z)
		return area * (g / 2 / tau)
	}
}

// Erfcx returns the scaled complementary error function exp(x²)·erfc(x).
//
// It is accurate to a few units in the last place over the real line: for
// x below 26 it multiplies math.Erfc by exp(x²), with x² split exactly into
// a rounded part and its rounding error so the large exponent loses no
// precision; from 26 on it sums the asymptotic series
// 1/(x√π)·Σ (−1)ⁿ(2n−1)!!/(2x²)ⁿ, whose terms fall below 1e-17 within eight
// terms there. For x below about −26.6 the true value 2·exp(x²) − erfcx(−x)
// exceeds the float64 range and +Inf is returned.
func Erfcx(x float64) float64 {
	switch {
	case math.IsNaN(x):
		return x
	case x >= erfcxAsymptotic:
		return zErfcx(x) / x
	case x >= 0:
		return expSquare(x) * math.Erfc(x)
	default:
		// erfc(x) = 2 − erfc(−x); the subtraction is benign because
		// 2·exp(x²) ≥ 2 > erfcx(−x).
		return 2*expSquare(x) - Erfcx(-x)
	}
}

// erfcxAsymptotic is where Erfcx switches from exp(x²)·erfc(x) to the
// asymptotic series (math.Erfc underflows to subnormals near 26.5).
const erfcxAsymptotic = 26

// zErfcx returns x·erfcx(x) for x ≥ 0 without overflow or underflow.
func zErfcx(x float64) float64 {
	if x < erfcxAsymptotic {
		return x * Erfcx(x)
	}
	// 1/√π·Σ (−1)ⁿ(2n−1)!!/(2x²)ⁿ; terms shrink by (2n+1)/(2x²) ≤ 1/40 here.
	v := 1 / (2 * x * x)
	sum, term := 1.0, 1.0
	for n := 1; n <= 12; n++ {
		term *= -float64(2*n-1) * v
		sum += term
		if math.Abs(term) < 1e-17*sum {
			break
		}
	}
	return sum / math.SqrtPi
}

// expSquare returns exp(x²) with x² split into its rounded value and the
// exact rounding error (by fused multiply–add), so that the error of the
// square is not amplified by the exponential.
func expSquare(x float64) float64 {
	hi := x * x
	if hi > 710 {
		return math.Inf(1)
	}
	lo := math.FMA(x, x, -hi)
	return math.Exp(hi) * (1 + lo)
}

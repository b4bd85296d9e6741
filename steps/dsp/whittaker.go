package dsp

import (
	"errors"
	"fmt"
	"math"
	"math/bits"
	"slices"
)

// Whittaker computes the Whittaker smoother of y with weights w and
// smoothing parameter lambda > 0: the z that minimises
//
//	Σ w_i·(y_i − z_i)² + λ·Σ (z_i − 2·z_{i+1} + z_{i+2})²,
//
// i.e. the solution of (W + λ·DᵀD)·z = W·y with D the second-difference
// matrix. It writes z, which must have the length of y and w. The
// pentadiagonal system is solved by a banded LDLᵀ factorisation in O(n)
// time without forming a matrix; the only allocation is a workspace of 2n
// values. Weights must be finite and non-negative with at least two
// positive (zero-weight points are interpolated); y needs at least 3
// points. Any straight line is returned unchanged, whatever the weights.
//
// Accuracy: the weighted least-squares line of y is solved for exactly and
// only the curved remainder goes through the factorisation, whose rounding
// error is roughly (λ/w)·1e-16 relative to that remainder (w a typical
// weight): about 1e-7 at λ = 1e10 with unit weights. Towards λ/w ≈ 1e13
// the weights are lost against λ in double precision: the result degrades
// and the solve may fail with an error.
func Whittaker(y, w []float64, lambda float64, z []float64) error {
	n := len(y)
	if len(w) != n || len(z) != n {
		return fmt.Errorf("whittaker: %d data points but %d weights and %d outputs", n, len(w), len(z))
	}
	if n < 3 {
		return fmt.Errorf("whittaker: a trace of %d points is too short for a second-difference smoother (need at least 3)", n)
	}
	if !(lambda > 0) || math.IsInf(lambda, 0) {
		return fmt.Errorf("whittaker: lambda must be positive and finite, got %g", lambda)
	}
	if err := checkFinite("whittaker", y); err != nil {
		return err
	}
	positive := 0
	for i, v := range w {
		if !(v >= 0) || math.IsInf(v, 0) {
			return fmt.Errorf("whittaker: weight %d is %g; weights must be finite and non-negative", i, v)
		}
		if v > 0 {
			positive++
		}
	}
	if positive < 2 {
		return fmt.Errorf("whittaker: %d positive weights; at least two points need a positive weight", positive)
	}
	var s bandSolver
	s.resize(n)
	return s.solve(y, w, lambda, z)
}

// bandSolver holds the workspace of the banded LDLᵀ solve of
// (W + λDᵀD)z = Wy: the two sub-diagonals of the unit lower factor L.
type bandSolver struct {
	e, f []float64 // L[i+1][i] and L[i+2][i]
}

func (s *bandSolver) resize(n int) {
	if cap(s.e) < n {
		s.e = make([]float64, n)
		s.f = make([]float64, n)
	}
	s.e, s.f = s.e[:n], s.f[:n]
}

var errSingular = errors.New("whittaker: the weighted system is numerically singular: too few points with positive weight, or lambda too large for the weights (keep lambda/weight below about 1e13)")

// line is the straight line a + b·(i − c) over the sample index i.
type line struct{ a, b, c float64 }

func (l line) at(i int) float64 { return l.a + l.b*(float64(i)-l.c) }

// solve writes the solution to z. len(y) = len(w) = len(z) = n ≥ 3 and the
// workspace has length n.
func (s *bandSolver) solve(y, w []float64, lambda float64, z []float64) error {
	l, ok := weightedLine(y, w)
	if !ok {
		return errSingular
	}
	if err := s.forward(y, w, lambda, z, l); err != nil {
		return err
	}
	e, f := s.e[:len(z)], s.f[:len(z)]
	n := len(z)
	// Back substitution Lᵀ·s = u/d, keeping s_{i+1} and s_{i+2} in
	// registers, then z = ℓ + s.
	s1 := z[n-1]
	s0 := z[n-2] - e[n-2]*s1
	z[n-1] = s1 + l.at(n-1)
	z[n-2] = s0 + l.at(n-2)
	s2, s1 := s1, s0
	for i := n - 3; i >= 0; i-- {
		si := z[i] - f[i]*s2 - e[i]*s1
		z[i] = si + l.at(i)
		s2, s1 = s1, si
	}
	return nil
}

// forward factorises A = W + λDᵀD and runs the forward substitution for
// the right-hand side W·(y − ℓ), leaving u_i/d_i in z and the factor in the
// workspace; the back substitution Lᵀ·s = u/d and z = ℓ + s remain.
//
// Rounding in a factorisation of A leaves an error of roughly (λ/w)·ε times
// the size of the solution, while straight lines, the null space of D, are
// reproduced exactly by the exact solution. So a line ℓ close to the data
// is taken out first: A·ℓ = W·ℓ for every line because D·ℓ = 0, hence
// z = ℓ + s with A·s = W·(y − ℓ), and only the curved part s carries the
// rounding error. Any line gives the same exact solution.
//
// With A = L·diag(d)·Lᵀ, L unit lower triangular with sub-diagonals e and
// f, writing g_i = e_i·d_i and using f_i·d_i = A[i+2][i], row i needs one
// division:
//
//	g_i = A[i+1][i] − f_{i−1}·g_{i−1}
//	d_i = A[i][i] − e_{i−1}·g_{i−1} − f_{i−2}·λ
//	e_i = g_i/d_i,  f_i = A[i+2][i]/d_i.
//
// The bands of DᵀD are 1, 5, 6, …, 6, 5, 1 on the diagonal, −2, −4, …, −4,
// −2 beside it and 1 two off it.
func (s *bandSolver) forward(y, w []float64, lambda float64, z []float64, l line) error {
	n := len(y)
	e, f := s.e[:n], s.f[:n]
	z = z[:n]
	w = w[:n]
	// Values carried from rows i−1 (…1) and i−2 (…2).
	var e1, g1, f1, f2, u1, u2 float64
	for i := range n {
		var b0, b1, a2 float64
		if i >= 2 && i < n-2 {
			b0, b1, a2 = 6, -4, lambda
		} else {
			b0, b1 = dtdBands(i, n)
			if i < n-2 {
				a2 = lambda
			}
		}
		d := w[i] + lambda*b0 - e1*g1 - f2*lambda
		if !(d > 0) {
			return errSingular
		}
		inv := 1 / d
		g := lambda*b1 - f1*g1
		u := w[i]*(y[i]-l.at(i)) - e1*u1 - f2*u2
		ei, fi := g*inv, a2*inv
		e[i], f[i], z[i] = ei, fi, u*inv
		e1, g1 = ei, g
		f2, f1 = f1, fi
		u2, u1 = u1, u
	}
	return nil
}

// weightedLine returns the weighted least-squares line through the points
// (i, y_i) with weights w, centred at the weighted mean index, and false
// when the weights do not determine a line (fewer than two distinct points
// with positive weight). Two passes keep the sums centred.
func weightedLine(y, w []float64) (line, bool) {
	var sw, sx, sy float64
	for i, wi := range w {
		sw += wi
		sx += wi * float64(i)
		sy += wi * y[i]
	}
	if !(sw > 0) {
		return line{}, false
	}
	c, a := sx/sw, sy/sw
	var sxx, sxy float64
	for i, wi := range w {
		dx := float64(i) - c
		sxx += wi * dx * dx
		sxy += wi * dx * (y[i] - a)
	}
	if !(sxx > 0) {
		return line{}, false
	}
	return line{a, sxy / sxx, c}, true
}

// dtdBands returns the diagonal and first off-diagonal (i, i+1) entries of
// DᵀD in row i of n, counting the rows k = i−2…i of D (coefficients 1, −2,
// 1 at columns k…k+2) that exist.
func dtdBands(i, n int) (b0, b1 float64) {
	row := func(k int) bool { return k >= 0 && k <= n-3 }
	if row(i) {
		b0, b1 = b0+1, b1-2
	}
	if row(i - 1) {
		b0, b1 = b0+4, b1-2
	}
	if row(i - 2) {
		b0++
	}
	return b0, b1
}

func checkFinite(what string, y []float64) error {
	for i, v := range y {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("%s: data point %d is %g; data must be finite", what, i, v)
		}
	}
	return nil
}

// DefaultClip is the clipping level, in noise SDs above the centre of the
// noise, that AsLS uses when AsLSOptions.Clip is 0.
const DefaultClip = 3

// AsLSOptions are the parameters of AsLS.
type AsLSOptions struct {
	// Lambda is the smoothing parameter λ > 0 of the Whittaker smoother.
	// The baseline follows features longer than about π·(16λ)^¼ points; for
	// the same stiffness in time, k times more points per minute need k⁴·λ.
	// Keep λ/p below about 1e13 (see Whittaker).
	Lambda float64
	// Asymmetry is the weight p, 0 < p < 0.5, of points above the baseline
	// (points on or below it get 1 − p).
	Asymmetry float64
	// MaxIter ≥ 1 caps the number of weighted solves.
	MaxIter int
	// Tol ≥ 0 also ends the iteration when no point of the baseline moved
	// by more than Tol noise SDs since the previous solve; 0 means stop only
	// when the weights no longer change.
	Tol float64
	// Clip is the robust clipping level: points more than Clip noise SDs
	// above the centre of the noise get weight 0. 0 selects DefaultClip; a
	// negative value turns clipping off (textbook AsLS).
	Clip float64
}

// AsLS estimates the baseline of y by asymmetric least squares (Eilers &
// Boelens 2005) with a robust clipping rule for dominant peaks. It returns
// the baseline, the number of weighted solves performed and an error for
// invalid options or data.
//
// Method. Starting from unit weights, it repeats
//
//  1. z = the Whittaker smoother of y with weights w and λ (see Whittaker);
//  2. with the residual r_i = y_i − z_i, set w_i = 0 if r_i > T,
//     w_i = p if 0 < r_i ≤ T and w_i = 1 − p if r_i ≤ 0;
//
// until no weight changes, the baseline moves by at most Tol·σ, or MaxIter
// solves have been made. The z of the last solve is returned; reaching
// MaxIter is not an error (iterations == MaxIter tells the caller).
//
// With clipping on, two things shorten the iteration (from about 10 to 6
// solves on the purity test traces, with the same result): the first solve
// already gives weight 0 to the points next to a step between neighbouring
// samples that differs from the median step by more than Clip·√2·σ (the
// flanks of tall peaks; skipped if that would exclude half the trace), and
// the first reweighting measures residuals from that first fit lowered by
// −e(p)·σ (e(p) below), where the iteration will settle. With clipping off
// the iteration is the textbook one, starting from unit weights.
//
// The noise SD σ is estimated once, robustly, from the first differences
// of the data: σ = 1.4826·median|Δy_i − median(Δy)|/√2, the median absolute
// deviation scaled to a normal SD, divided by √2 because a difference of
// two noise values has variance 2σ². Peaks and a smooth drift barely move
// this median. σ is floored at 1e-10·max|y| so that noise-free data are not
// clipped on rounding error.
//
// The clipping threshold is T = (Clip − e(p))·σ, where e(p) < 0 is the
// p-expectile of the standard normal distribution (−2.44 for p = 0.001,
// −1.72 for 0.01, −0.86 for 0.1). Asymmetric least squares leaves the
// baseline near that expectile, e(p)·σ below the centre of the noise, so T
// clips the points more than Clip·σ above the noise centre whatever p is;
// measuring from the baseline itself would clip a large share of plain
// noise for small p and drag the baseline down.
//
// Why clip. In textbook AsLS (Clip < 0) a point far above the baseline
// still pulls it up with weight p. For a main peak thousands of times
// higher than the noise, p·r² outweighs the baseline points, so the
// baseline rises under the peak and, being stiff, dips below the data
// beside it; that invents impurity peaks and biases every area percentage.
// Clipped points exert no pull, so the baseline is interpolated across the
// peak from the points around it. Points clipped by mistake in an early
// iteration return once the baseline has settled, because the weights are
// recomputed from scratch each time.
//
// Limits. The returned baseline lies e(p)·σ below the noise centre, as in
// textbook AsLS; with clipping, p no longer has to hold the baseline under
// the peaks, and p = 0.01–0.1 keeps it closer to the noise. A clipped
// region is bridged by a smooth curve, so a baseline rise the smoother
// cannot follow (λ too large for the drift, typically column bleed at the
// end of a temperature programme) is clipped as well and bridged from
// below; lower λ or raise p if the baseline falls away there.
func AsLS(y []float64, opt AsLSOptions) (z []float64, iterations int, err error) {
	n := len(y)
	switch {
	case n < 3:
		return nil, 0, fmt.Errorf("asls: a trace of %d points is too short for a baseline (need at least 3)", n)
	case !(opt.Lambda > 0) || math.IsInf(opt.Lambda, 0):
		return nil, 0, fmt.Errorf("asls: lambda must be positive and finite, got %g", opt.Lambda)
	case !(opt.Asymmetry > 0 && opt.Asymmetry < 0.5):
		return nil, 0, fmt.Errorf("asls: asymmetry must lie strictly between 0 and 0.5, got %g", opt.Asymmetry)
	case opt.MaxIter < 1:
		return nil, 0, fmt.Errorf("asls: the maximum number of iterations must be at least 1, got %d", opt.MaxIter)
	case !(opt.Tol >= 0) || math.IsInf(opt.Tol, 0):
		return nil, 0, fmt.Errorf("asls: tolerance must be finite and non-negative, got %g", opt.Tol)
	case math.IsNaN(opt.Clip) || math.IsInf(opt.Clip, 0):
		return nil, 0, fmt.Errorf("asls: clip level must be finite, got %g", opt.Clip)
	}
	if err := checkFinite("asls", y); err != nil {
		return nil, 0, err
	}

	var s bandSolver
	s.resize(n)
	slope, sigma := diffStats(y, s.e)
	var scale float64
	for _, v := range y {
		if a := math.Abs(v); a > scale {
			scale = a
		}
	}
	sigma = math.Max(sigma, 1e-10*scale)
	p, q := opt.Asymmetry, 1-opt.Asymmetry
	clip := opt.Clip
	if clip == 0 {
		clip = DefaultClip
	}
	limit := math.Inf(1)
	if clip > 0 {
		limit = (clip - normalExpectile(p)) * sigma
	}

	w := make([]float64, n)
	for i := range w {
		w[i] = 1
	}
	// The line taken out before each solve (see bandSolver.forward) is the
	// unweighted least-squares line; any line gives the same solution.
	l, _ := weightedLine(y, w)
	// Robust start: leave the flanks of tall peaks out of the first solve.
	var shift float64
	if clip > 0 {
		seedSteepFlanks(y, w, slope, clip*math.Sqrt2*sigma)
		shift = -normalExpectile(p) * sigma
	}
	z = make([]float64, n)
	var prev []float64
	if opt.Tol > 0 {
		prev = make([]float64, n)
	}
	e, f := s.e[:n], s.f[:n]
	for iterations < opt.MaxIter {
		if prev != nil {
			z, prev = prev, z
		}
		if err := s.forward(y, w, opt.Lambda, z, l); err != nil {
			return nil, iterations, err
		}
		iterations++
		// Back substitution fused with the new weights and the move since
		// the previous solve; s1, s2 are the curved parts at i+1, i+2.
		changed, positive := 0, 0
		var move, s1, s2 float64
		for i := n - 1; i >= 0; i-- {
			si := z[i]
			if i < n-2 {
				si -= f[i] * s2
			}
			if i < n-1 {
				si -= e[i] * s1
			}
			zi := si + l.at(i)
			z[i] = zi
			s2, s1 = s1, si
			wi := aslsWeight(y[i]-zi+shift, limit, p, q)
			if wi != w[i] {
				changed++
				w[i] = wi
			}
			if wi > 0 {
				positive++
			}
			if prev != nil {
				if d := math.Abs(zi - prev[i]); d > move {
					move = d
				}
			}
		}
		if changed == 0 || (prev != nil && iterations > 1 && move <= opt.Tol*sigma) {
			break
		}
		shift = 0
		if positive < 2 {
			return nil, iterations, fmt.Errorf("asls: fewer than two points lie within %g noise SDs of the baseline; raise the clip level", clip)
		}
	}
	return z, iterations, nil
}

// seedSteepFlanks sets w to 0 at the points next to a step y[i+1] − y[i]
// that differs from the typical step slope by more than steep, unless that
// would leave fewer than half of the points (a start heuristic only).
func seedSteepFlanks(y, w []float64, slope, steep float64) {
	n := len(y)
	zeros := 0
	for i := 0; i+1 < n; i++ {
		if math.Abs(y[i+1]-y[i]-slope) > steep {
			for k := max(i-1, 0); k <= min(i+2, n-1); k++ {
				if w[k] != 0 {
					w[k] = 0
					zeros++
				}
			}
		}
	}
	if zeros > n/2 {
		for i := range w {
			w[i] = 1
		}
	}
}

// aslsWeight is the AsLS weight of a point with residual r = y − z.
func aslsWeight(r, limit, p, q float64) float64 {
	switch {
	case r > limit:
		return 0
	case r > 0:
		return p
	}
	return q
}

// normalExpectile returns the p-expectile e of the standard normal
// distribution, the root of p·E[(X−e)⁺] = (1−p)·E[(e−X)⁺] with
// E[(X−e)⁺] = φ(e) − e·(1−Φ(e)) and E[(e−X)⁺] = φ(e) + e·Φ(e), by
// bisection (the difference is decreasing in e).
func normalExpectile(p float64) float64 {
	lo, hi := -40.0, 40.0
	for range 100 {
		e := (lo + hi) / 2
		phi := math.Exp(-e*e/2) / math.Sqrt(2*math.Pi)
		cdf := math.Erfc(-e/math.Sqrt2) / 2
		if p*(phi-e*(1-cdf)) > (1-p)*(phi+e*cdf) {
			lo = e
		} else {
			hi = e
		}
	}
	return (lo + hi) / 2
}

// diffNoiseSD returns the robust noise SD estimate 1.4826·MAD(Δy)/√2 of
// AsLS, using scratch (length ≥ len(y)) as workspace.
func diffNoiseSD(y, scratch []float64) float64 {
	_, sd := diffStats(y, scratch)
	return sd
}

// diffStats returns the median first difference of y and the noise SD
// 1.4826·median|Δy_i − median(Δy)|/√2, using scratch as workspace.
func diffStats(y, scratch []float64) (slope, sd float64) {
	d := scratch[:len(y)-1]
	for i := range d {
		d[i] = y[i+1] - y[i]
	}
	slope = medianInPlace(d)
	for i, v := range d {
		d[i] = math.Abs(v - slope)
	}
	return slope, 1.4826 * medianInPlace(d) / math.Sqrt2
}

// medianInPlace returns the median of a (the mean of the two middle values
// for even length), reordering a. It runs a quickselect with
// median-of-three pivots in expected O(n) and falls back to sorting if the
// partitioning degenerates.
func medianInPlace(a []float64) float64 {
	n := len(a)
	hi := selectKth(a, n/2)
	if n%2 == 1 {
		return hi
	}
	// After selection every value left of n/2 is ≤ a[n/2].
	return (slices.Max(a[:n/2]) + hi) / 2
}

// selectKth reorders a so that a[k] is the value of rank k, with smaller or
// equal values before it, and returns a[k].
func selectKth(a []float64, k int) float64 {
	lo, hi := 0, len(a)-1
	budget := 2 * bits.Len(uint(len(a)))
	for hi > lo {
		if budget == 0 {
			slices.Sort(a[lo : hi+1])
			return a[k]
		}
		budget--
		mid := lo + (hi-lo)/2
		if a[mid] < a[lo] {
			a[mid], a[lo] = a[lo], a[mid]
		}
		if a[hi] < a[lo] {
			a[hi], a[lo] = a[lo], a[hi]
		}
		if a[hi] < a[mid] {
			a[hi], a[mid] = a[mid], a[hi]
		}
		pivot := a[mid]
		i, j := lo, hi
		for i <= j {
			for a[i] < pivot {
				i++
			}
			for a[j] > pivot {
				j--
			}
			if i <= j {
				a[i], a[j] = a[j], a[i]
				i++
				j--
			}
		}
		switch {
		case k <= j:
			hi = j
		case k >= i:
			lo = i
		default:
			return a[k]
		}
	}
	return a[k]
}

package steps

import (
	"context"
	"fmt"
	"math"

	"lotgate/steps/dsp"
)

// Sets of system-suitability constants for Integrate.Constants.
const (
	// ConstantsPharmacopoeia selects N = 5.54·(tR/wh)² and
	// Rs = 1.18·Δt/(wh1 + wh2), as printed in the pharmacopoeias.
	ConstantsPharmacopoeia = "pharmacopoeia"
	// ConstantsExact selects N = 8·ln 2·(tR/wh)² and
	// Rs = √(2·ln 2)·Δt/(wh1 + wh2), the values that make the half-height
	// formulas equal to the tangent-width ones on Gaussian peaks.
	ConstantsExact = "exact"
)

// Integrate measures every detected peak on the baseline-corrected working
// signal y = Processed − Baseline:
//
//   - Area: the trapezoidal sum of y over the samples Start…End, in
//     signal·s. Because y is already baseline-corrected, a perpendicular drop
//     at a shared valley is vertical down to the baseline, and the areas of
//     peaks split by a drop add up to the area of the whole cluster.
//   - RT and Height: the vertex of the parabola through the apex sample and
//     its two neighbours.
//   - WidthHalf and Width5 (min): the distance between the crossings of 50 %
//     and 5 % of Height on either side of the apex, each interpolated
//     linearly between the two samples around it and searched only within
//     Start…End, so that a width cut by a perpendicular drop is 0 ("not
//     measurable") rather than a guess.
//   - Tailing = Width5/(2f), f the distance from the leading 5 % crossing
//     to RT.
//   - Plates = c·(RT/WidthHalf)², RT read on the trace's own time axis
//     (injection at 0 min).
//   - SNR = 2·Height/h, h the noise range found by detect.
//   - Resolution from the previous peak = c′·(RT2 − RT1)/(wh1 + wh2).
//
// The constants are c = 5.54 and c′ = 1.18 (ConstantsPharmacopoeia, the
// default) or c = 8·ln 2 and c′ = √(2·ln 2) (ConstantsExact). A figure that
// cannot be measured is 0; no figure is ever NaN or infinite.
type Integrate struct {
	// Constants is ConstantsPharmacopoeia, ConstantsExact or "" (the
	// pharmacopoeia set).
	Constants string
}

// Name implements Step.
func (s *Integrate) Name() string { return "integrate" }

// Convention returns the name of the constant set in use, with "" resolved
// to ConstantsPharmacopoeia, for the record.
func (s *Integrate) Convention() string {
	if s.Constants == "" {
		return ConstantsPharmacopoeia
	}
	return s.Constants
}

// Run implements Step. It needs the peaks and noise estimate of a detect
// step (an error wrapping ErrNeeds otherwise).
func (s *Integrate) Run(ctx context.Context, r *Run) error {
	var cN, cR float64
	switch s.Convention() {
	case ConstantsPharmacopoeia:
		cN, cR = dsp.PlatesPharmacopoeia, dsp.ResolutionPharmacopoeia
	case ConstantsExact:
		cN, cR = dsp.PlatesExact, dsp.ResolutionExact
	default:
		return fmt.Errorf("integrate: unknown constants %q (use %q or %q)", s.Constants, ConstantsPharmacopoeia, ConstantsExact)
	}
	if r.Noise == nil || !r.Ran("detect") {
		return fmt.Errorf("integrate: %w: detected peaks and a noise estimate (add a detect step before integrate)", ErrNeeds)
	}
	if err := checkLengths("integrate", r); err != nil {
		return err
	}
	if err := ctx.Err(); err != nil {
		return err
	}
	n := len(r.Processed)
	for i, p := range r.Peaks {
		if p.Start < 0 || p.Start >= p.Apex || p.Apex >= p.End || p.End >= n {
			return fmt.Errorf("integrate: peak %d has samples start %d, apex %d, end %d; they must satisfy 0 ≤ start < apex < end < %d", i+1, p.Start, p.Apex, p.End, n)
		}
	}
	y := correctedView(r)
	t := r.Trace.Time
	for i := range r.Peaks {
		p := &r.Peaks[i]
		m := measure(t, y, p.Start, p.Apex, p.End)
		p.RT, p.Height, p.Area = m.rt, m.height, m.area
		p.WidthHalf, p.Width5 = m.wHalf, m.w5
		p.Tailing = finiteOr0(dsp.Symmetry(m.w5, m.lead5))
		p.Plates = finiteOr0(dsp.PlateNumber(m.rt, m.wHalf, cN))
		p.SNR = finiteOr0(dsp.SignalToNoise(m.height, r.Noise.PeakToPeak))
		p.Resolution = 0
		if i > 0 {
			q := &r.Peaks[i-1]
			p.Resolution = finiteOr0(dsp.Resolution(q.RT, p.RT, q.WidthHalf, p.WidthHalf, cR))
		}
	}
	return nil
}

// shape holds the figures of one peak that depend on its samples alone.
// Detect filters on them and integrate reports them, from this one code.
type shape struct {
	rt, height, area float64 // min, signal units, signal·s
	wHalf, w5, lead5 float64 // min; 0 when not measurable
}

// measure computes the shape figures of the peak spanning samples
// start…end with its apex at sample apex, on the times t (min) and the
// baseline-corrected signal y. The indices must satisfy
// 0 ≤ start < apex < end < len(y).
func measure(t, y []float64, start, apex, end int) shape {
	pos, h := dsp.Apex(y, apex)
	m := shape{rt: finiteOr0(timeAt(t, pos)), height: finiteOr0(h)}
	var a float64
	for i := start; i < end; i++ {
		a += (y[i] + y[i+1]) * (t[i+1] - t[i])
	}
	m.area = finiteOr0(a / 2 * 60)
	if !(m.height > 0) {
		return m
	}
	if l, r, ok := dsp.Crossings(y, apex, start, end, 0.5*m.height); ok {
		m.wHalf = finiteOr0(timeAt(t, r) - timeAt(t, l))
	}
	if l, r, ok := dsp.Crossings(y, apex, start, end, 0.05*m.height); ok {
		m.w5 = finiteOr0(timeAt(t, r) - timeAt(t, l))
		m.lead5 = finiteOr0(m.rt - timeAt(t, l))
	}
	return m
}

// timeAt interpolates the sample times t linearly at the fractional index pos
// (clamped to the trace).
func timeAt(t []float64, pos float64) float64 {
	if pos <= 0 {
		return t[0]
	}
	i := int(pos)
	if i >= len(t)-1 {
		return t[len(t)-1]
	}
	return t[i] + (pos-float64(i))*(t[i+1]-t[i])
}

// correctedView returns the baseline-corrected working signal for reading only:
// Processed itself when there is no baseline, else r.Corrected().
func correctedView(r *Run) []float64 {
	if r.Baseline == nil {
		return r.Processed
	}
	return r.Corrected()
}

// finiteOr0 returns x, or 0 when x is NaN or infinite.
func finiteOr0(x float64) float64 {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return 0
	}
	return x
}

// checkLengths reports a run whose time, working signal and baseline differ
// in length (which would make Corrected panic).
func checkLengths(step string, r *Run) error {
	n := len(r.Processed)
	if len(r.Trace.Time) != n {
		return fmt.Errorf("%s: the trace has %d times but the working signal has %d values", step, len(r.Trace.Time), n)
	}
	if r.Baseline != nil && len(r.Baseline) != n {
		return fmt.Errorf("%s: the baseline has %d values but the working signal has %d", step, len(r.Baseline), n)
	}
	return nil
}

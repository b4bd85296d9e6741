package steps

import (
	"context"
	"fmt"
	"math"

	"lotgate/steps/dsp"
)

// Window is a stretch of the trace in minutes, both ends included.
type Window struct{ From, To float64 }

// Noise estimation methods, as recorded in Noise.Method.
const (
	NoiseByBlocks = "blocks"
	NoiseByWindow = "window"
)

// Detection defaults and fixed parameters.
const (
	// defaultNoiseBlock is the noise block length in minutes when
	// Detect.NoiseBlock is 0.
	defaultNoiseBlock = 1.0
	// minValleySNR is the least dip, in S/N units 2·depth/h, that separates
	// two apexes when Detect.MinSNR is smaller: a dip of one noise range.
	minValleySNR = 2
	// zeroNoiseFraction sets the noise range used when the measured one is
	// zero (a noise-free signal): this fraction of the largest |signal|.
	zeroNoiseFraction = 1e-9
	// rangePerSD converts a noise range to an SD where only the range is
	// known: about the expected range of a few hundred normal samples
	// (common practice).
	rangePerSD = 6
)

// Detect finds the peaks of the baseline-corrected working signal
// y = Processed − Baseline and measures its background noise. Peaks point
// upwards; the trace must be evenly sampled.
//
// Noise. With NoiseWindow set, the noise is that one stretch: SD and range h
// (max − min) of y there after removing its least-squares straight line
// (method "window"). Otherwise y outside the Ignore windows is cut into
// blocks of NoiseBlock minutes (1 min when 0); within each block, the tenths
// that hold a peak (a detrended SD well above that of the quietest quarter
// of all tenths) are set aside with their neighbours, a straight line is
// fitted to the rest and removed, and the medians over the blocks of the
// residuals' SDs and ranges are taken (method "blocks"; dsp.NoiseSpans has
// the details). The estimate stays right when every block touches a peak,
// as long as peaks with their tails cover less than about half of each
// block. A noise range of 0 (a noise-free synthetic signal) is replaced by
// 1e-9 of the largest |y| (1 when y is all zero), and a zero SD by a sixth
// of the range, with a warning, so that no ratio is ever infinite.
//
// Apexes. The slope of y is the Savitzky–Golay first derivative (quadratic
// fit) over SlopeWindow points; the auto choice, for 0, is about a quarter
// of the half-height width, in samples, of the tallest sample outside the
// Ignore windows, odd and between 5 and 21 (5 when that width cannot be
// measured, as for a signal that falls from the start of the trace). Every
// sample where the slope turns from positive to zero or negative, and s,
// the centred moving average of y over the slope window, is above the noise
// level (one noise SD), is a candidate; its apex is the highest sample
// within half a slope window of it (the first on ties, never the first or
// last sample of the trace). A candidate is kept when its apex sample y_a
// is above the noise level and 2·y_a/h is at least MinSNR.
//
// Merging. The valley between two neighbouring candidates is the lowest s
// between them. Where a valley falls to the noise level the candidates lie on
// separate stretches above the baseline and never merge. Otherwise each
// candidate is ranked by its apex height (the earlier one wins a tie), and
// its prominence is its height minus the higher of the two lowest valleys
// on its left and on its right, each side taken as far as the nearest
// higher-ranked candidate (up to a return to the noise level, where that
// side imposes no limit). A candidate whose prominence is below
// max(MinSNR, 2)·h/2 is a noise wiggle on a larger peak (on a tail, say) and
// is absorbed by it; the others are peaks. The outcome does not depend on
// the order of the candidates.
//
// Boundaries. Two neighbouring peaks whose valley stays above the noise
// level share it: the lowest s between them is a perpendicular drop, the
// end of the first and the start of the second (EndDrop, StartDrop).
// Otherwise a peak starts (ends) at the nearest sample before (after) the
// apex where s falls to the noise level, or at the first (last) sample.
//
// Filters. Each peak is measured by the same code as Integrate; it is
// dropped when 2·Height/h < MinSNR, WidthHalf < MinWidth (a width that
// cannot be measured is not dropped), Height < MinHeight or Area < MinArea
// (each 0 = no check), or when its RT lies inside an Ignore window. A
// dropped peak leaves its neighbours' boundaries as they were.
//
// Peaks come out in time order. Every step is a deterministic function of
// the run state. ctx is checked between the phases (each phase is one or two
// linear passes over the trace), not inside them.
type Detect struct {
	// MinSNR is the least signal-to-noise ratio 2H/h of a peak (e.g. 3).
	MinSNR float64
	// MinWidth is the least half-height width (min); 0 = no check.
	MinWidth float64
	// MinHeight is the least height (signal units); 0 = no check.
	MinHeight float64
	// MinArea is the least area (signal·s); 0 = no check.
	MinArea float64
	// NoiseBlock is the block length (min) of the noise estimate; 0 = 1 min.
	NoiseBlock float64
	// NoiseWindow names a quiet stretch for the noise estimate; it overrides
	// the blocks.
	NoiseWindow *Window
	// Ignore lists stretches where no peak is reported (the unretained peak
	// at the start, say); they are also left out of the noise blocks.
	Ignore []Window
	// SlopeWindow is the odd number of points (≥ 3) of the Savitzky–Golay
	// slope filter; 0 = auto.
	SlopeWindow int
}

// Name implements Step.
func (d *Detect) Name() string { return "detect" }

// Run implements Step: it sets r.Noise and replaces r.Peaks (never nil
// afterwards).
func (d *Detect) Run(ctx context.Context, r *Run) error {
	if err := d.check(); err != nil {
		return err
	}
	if err := checkLengths("detect", r); err != nil {
		return err
	}
	t := r.Trace.Time
	n := len(t)
	for i := 1; i < n; i++ {
		if !(t[i] > t[i-1]) {
			return fmt.Errorf("detect: the times must increase, but sample %d is at %g min after %g min", i+1, t[i], t[i-1])
		}
	}
	y := correctedView(r)
	for i, v := range y {
		if math.IsNaN(v) || math.IsInf(v, 0) {
			return fmt.Errorf("detect: the baseline-corrected signal at %g min (sample %d) is %g", t[i], i+1, v)
		}
	}
	free := d.freeSpans(t)
	noise, floored, err := d.noise(t, y, r.Trace.Interval(), free)
	if err != nil {
		return err
	}
	r.Noise = noise
	if floored {
		r.Warn(fmt.Sprintf("detect: the background noise measured zero (a noise-free signal, or nothing outside the ignore windows); S/N uses a noise range of %g", noise.PeakToPeak))
	}
	r.Peaks = []Peak{}
	if n < 5 {
		return nil
	}
	if err := ctx.Err(); err != nil {
		return err
	}

	w := d.SlopeWindow
	if w == 0 {
		w = autoSlopeWindow(y, free)
	}
	if w > n {
		w = n - (1 - n%2) // largest odd window that fits
	}
	slope, err := dsp.SavitzkyGolay(y, w, 2, 1, 1)
	if err != nil {
		return fmt.Errorf("detect: slope filter: %w", err)
	}
	s, err := dsp.MovingAverage(y, w)
	if err != nil {
		return fmt.Errorf("detect: moving average: %w", err)
	}
	if err := ctx.Err(); err != nil {
		return err
	}

	level := noise.SD
	h := noise.PeakToPeak
	apexes := candidates(y, s, slope, w/2, level, h, d.MinSNR)
	apexes = dropWiggles(y, s, apexes, level, max(d.MinSNR, minValleySNR)*h/2)
	if err := ctx.Err(); err != nil {
		return err
	}
	peaks := bound(s, apexes, level)
	for _, p := range peaks {
		m := measure(t, y, p.Start, p.Apex, p.End)
		switch {
		case dsp.SignalToNoise(m.height, h) < d.MinSNR,
			d.MinWidth > 0 && m.wHalf > 0 && m.wHalf < d.MinWidth,
			d.MinHeight > 0 && m.height < d.MinHeight,
			d.MinArea > 0 && m.area < d.MinArea,
			inWindows(m.rt, d.Ignore):
			continue
		}
		r.Peaks = append(r.Peaks, p)
	}
	return nil
}

// check validates the settings.
func (d *Detect) check() error {
	for _, v := range []struct {
		name string
		x    float64
	}{{"minimum S/N", d.MinSNR}, {"minimum width", d.MinWidth}, {"minimum height", d.MinHeight}, {"minimum area", d.MinArea}, {"noise block length", d.NoiseBlock}} {
		if !(v.x >= 0) || math.IsInf(v.x, 1) {
			return fmt.Errorf("detect: the %s is %g; it must be a finite number ≥ 0", v.name, v.x)
		}
	}
	if d.SlopeWindow != 0 && (d.SlopeWindow < 3 || d.SlopeWindow%2 == 0) {
		return fmt.Errorf("detect: slope window is %d points; it must be odd and at least 3 (or 0 for automatic)", d.SlopeWindow)
	}
	ws := d.Ignore
	if d.NoiseWindow != nil {
		ws = append([]Window{*d.NoiseWindow}, ws...)
	}
	for _, w := range ws {
		if !(w.From <= w.To) {
			return fmt.Errorf("detect: window from %g to %g min: from must not be after to", w.From, w.To)
		}
	}
	return nil
}

// noise estimates the background noise of y sampled every dt minutes (see
// Detect); floored reports that a zero measurement was replaced.
func (d *Detect) noise(t, y []float64, dt float64, free []dsp.Span) (nz *Noise, floored bool, err error) {
	nz = &Noise{}
	if w := d.NoiseWindow; w != nil {
		lo, hi := 0, len(t)
		for lo < len(t) && t[lo] < w.From {
			lo++
		}
		for hi > lo && t[hi-1] > w.To {
			hi--
		}
		if hi-lo < 3 {
			return nil, false, fmt.Errorf("detect: the noise window %g–%g min holds %d samples; it needs at least 3", w.From, w.To, hi-lo)
		}
		nz.SD, nz.PeakToPeak = dsp.NoiseWindow(y[lo:hi])
		nz.Method, nz.FromMin, nz.ToMin = NoiseByWindow, w.From, w.To
	} else {
		nz.BlockMin = d.NoiseBlock
		if nz.BlockMin == 0 {
			nz.BlockMin = defaultNoiseBlock
		}
		block := len(y)
		if dt > 0 {
			block = int(min(math.Round(nz.BlockMin/dt), float64(len(y))))
		}
		nz.SD, nz.PeakToPeak = dsp.NoiseSpans(y, block, free)
		nz.Method = NoiseByBlocks
	}
	if !(nz.PeakToPeak > 0) {
		floored = true
		var top float64
		for _, v := range y {
			top = max(top, math.Abs(v))
		}
		nz.PeakToPeak = zeroNoiseFraction * top
		if !(nz.PeakToPeak > 0) {
			nz.PeakToPeak = 1
		}
	}
	if !(nz.SD > 0) {
		nz.SD = nz.PeakToPeak / rangePerSD
	}
	return nz, floored, nil
}

// freeSpans returns the runs of samples outside the Ignore windows.
func (d *Detect) freeSpans(t []float64) []dsp.Span {
	var spans []dsp.Span
	lo := -1
	for i, x := range t {
		in := inWindows(x, d.Ignore)
		switch {
		case !in && lo < 0:
			lo = i
		case in && lo >= 0:
			spans = append(spans, dsp.Span{Lo: lo, Hi: i})
			lo = -1
		}
	}
	if lo >= 0 {
		spans = append(spans, dsp.Span{Lo: lo, Hi: len(t)})
	}
	return spans
}

// inWindows reports whether x lies in one of ws.
func inWindows(x float64, ws []Window) bool {
	for _, w := range ws {
		if x >= w.From && x <= w.To {
			return true
		}
	}
	return false
}

// autoSlopeWindow picks the slope filter length from the tallest sample in
// the free spans: about a quarter of its half-height width in samples, odd,
// between 5 and 21.
func autoSlopeWindow(y []float64, free []dsp.Span) int {
	const lo, hi = 5, 21
	top := -1
	for _, sp := range free {
		for i := sp.Lo; i < sp.Hi; i++ {
			if top < 0 || y[i] > y[top] {
				top = i
			}
		}
	}
	if top < 0 {
		return lo
	}
	l, r, ok := dsp.Crossings(y, top, 0, len(y)-1, y[top]/2)
	if !ok {
		return lo
	}
	w := 2*int((r-l)/8) + 1
	return min(max(w, lo), hi)
}

// candidates returns the apex samples where the slope turns from positive to
// non-positive and the moving average s is above level, each moved to the
// highest y within half samples (the first on ties, never an end sample),
// without repeats, in increasing order, and kept when above level with
// 2·y/h ≥ minSNR.
func candidates(y, s, slope []float64, half int, level, h, minSNR float64) []int {
	n := len(y)
	var out []int
	for i := 1; i < n; i++ {
		if !(slope[i-1] > 0 && slope[i] <= 0 && s[i] > level) {
			continue
		}
		a := max(i-half, 1)
		for j := a + 1; j <= min(i+half, n-2); j++ {
			if y[j] > y[a] {
				a = j
			}
		}
		if len(out) > 0 && out[len(out)-1] == a {
			continue
		}
		if y[a] > level && dsp.SignalToNoise(y[a], h) >= minSNR {
			out = append(out, a)
		}
	}
	return out
}

// dropWiggles keeps the apexes whose prominence (see Detect) is at least
// minDip, in order. Valleys are read from s, heights from y.
func dropWiggles(y, s []float64, apexes []int, level, minDip float64) []int {
	k := len(apexes)
	if k < 2 {
		return apexes
	}
	// valley[i] is the lowest s strictly between apexes i and i+1; with no
	// sample between them it is the lower apex, which never separates.
	valley := make([]float64, k-1)
	for i := range valley {
		v := min(y[apexes[i]], y[apexes[i+1]])
		for _, x := range s[apexes[i]+1 : apexes[i+1]] {
			if x < v {
				v = x
			}
		}
		valley[i] = v
	}
	higher := func(i, j int) bool { // candidate i outranks candidate j
		yi, yj := y[apexes[i]], y[apexes[j]]
		return yi > yj || (yi == yj && i < j)
	}
	leftCol := sideCols(k, valley, level, higher, false)
	rightCol := sideCols(k, valley, level, higher, true)
	kept := apexes[:0:0]
	for i, a := range apexes {
		if y[a]-math.Max(leftCol[i], rightCol[i]) >= minDip {
			kept = append(kept, a)
		}
	}
	return kept
}

// sideCols returns, for every candidate, the lowest valley between it and
// the nearest higher-ranked candidate on one side (the right when fromRight),
// or −Inf when a valley at or below level, or the end of the list, comes
// first. It keeps a stack of candidates in decreasing rank, each with the
// lowest valley between it and the entry above it, so the work is linear.
func sideCols(k int, valley []float64, level float64, higher func(i, j int) bool, fromRight bool) []float64 {
	type entry struct {
		i   int
		low float64
	}
	col := make([]float64, k)
	stack := make([]entry, 0, k)
	for step := range k {
		i, gap := step, 0 // gap indexes the valley between i and the previous candidate
		if fromRight {
			i, gap = k-1-step, k-1-step
		} else {
			gap = i - 1
		}
		if step > 0 {
			v := valley[gap]
			if v <= level {
				stack = stack[:0]
			} else {
				top := &stack[len(stack)-1]
				top.low = math.Min(top.low, v)
			}
		}
		for len(stack) > 0 && higher(i, stack[len(stack)-1].i) {
			low := stack[len(stack)-1].low
			stack = stack[:len(stack)-1]
			if len(stack) > 0 {
				top := &stack[len(stack)-1]
				top.low = math.Min(top.low, low)
			}
		}
		col[i] = math.Inf(-1)
		if len(stack) > 0 {
			col[i] = stack[len(stack)-1].low
		}
		stack = append(stack, entry{i, math.Inf(1)})
	}
	return col
}

// bound gives every apex its start and end (see Detect): a perpendicular
// drop at the lowest s between two neighbours that stays above level, or
// else the nearest sample where s falls to level.
func bound(s []float64, apexes []int, level float64) []Peak {
	n := len(s)
	peaks := make([]Peak, len(apexes))
	for k, a := range apexes {
		p := &peaks[k]
		p.Apex = a
		if !p.StartDrop {
			i := a - 1
			for i > 0 && s[i] > level {
				i--
			}
			p.Start = i
		}
		if k+1 < len(apexes) {
			b := apexes[k+1]
			v := a + 1
			for j := a + 2; j < b; j++ {
				if s[j] < s[v] {
					v = j
				}
			}
			if v < b && s[v] > level {
				p.End, p.EndDrop = v, true
				peaks[k+1].Start, peaks[k+1].StartDrop = v, true
				continue
			}
		}
		j := a + 1
		for j < n-1 && s[j] > level {
			j++
		}
		p.End = j
	}
	return peaks
}

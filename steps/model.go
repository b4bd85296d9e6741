// Package steps holds lotgate's domain model (a chromatogram trace, its peaks
// and the named components found in it) and one file per processing step.
// Steps know nothing about HCL, files or reports: each is a small value with a
// Run method that reads and writes the shared run state.
package steps

import (
	"context"
	"errors"
)

// Trace is an evenly sampled chromatogram as read from a data file.
type Trace struct {
	// Time holds the sample times in minutes, strictly increasing.
	Time []float64
	// Signal holds the detector response, one value per time.
	Signal []float64
	// SignalUnit is the detector unit ("pA", "mV", ...) or "" when unknown.
	SignalUnit string
}

// Interval is the mean sampling interval in minutes (0 for fewer than two points).
func (t *Trace) Interval() float64 {
	n := len(t.Time)
	if n < 2 {
		return 0
	}
	return (t.Time[n-1] - t.Time[0]) / float64(n-1)
}

// Run is the state that the steps of one pipeline pass along for one file.
// Each step reads what earlier steps left and adds its own part.
type Run struct {
	Trace Trace
	// Meta is the file's metadata (sample id, lot, ...), keys normalised to
	// lower case with underscores.
	Meta map[string]string

	// Processed is the working signal: a copy of the raw signal, replaced by
	// the smooth step. Detection and integration work on it.
	Processed []float64
	// Baseline is the estimated baseline under Processed; nil means zero.
	Baseline []float64

	// Noise is the background noise estimate made by the detect step.
	Noise *Noise
	// Peaks are the detected peaks in time order; integrate fills in their
	// figures, identify names them.
	Peaks []Peak
	// Components are the named components declared for identification, in
	// declaration order, with what was found for each.
	Components []Component
	// Quant says how percentages were computed (set by quantify).
	Quant *Quantitation

	// Warnings collects things an analyst should read (an ambiguous match,
	// a clipped window ...). They reach the record.
	Warnings []string
	// Done lists the names of the steps that have run, in order.
	Done []string
}

// NewRun prepares the run state for a trace: the working signal starts as a
// copy of the raw signal.
func NewRun(tr Trace, meta map[string]string) *Run {
	p := make([]float64, len(tr.Signal))
	copy(p, tr.Signal)
	if meta == nil {
		meta = map[string]string{}
	}
	return &Run{Trace: tr, Meta: meta, Processed: p}
}

// Corrected returns Processed minus Baseline, point by point.
func (r *Run) Corrected() []float64 {
	out := make([]float64, len(r.Processed))
	copy(out, r.Processed)
	if r.Baseline != nil {
		for i := range out {
			out[i] -= r.Baseline[i]
		}
	}
	return out
}

// Warn adds a warning for the record.
func (r *Run) Warn(msg string) { r.Warnings = append(r.Warnings, msg) }

// Step is one stage of a pipeline.
type Step interface {
	// Name is the step's block name in the pipeline ("smooth", "detect" ...).
	Name() string
	// Run reads and updates the run state.
	Run(ctx context.Context, r *Run) error
}

// Noise describes the background noise of the baseline-corrected working
// signal.
type Noise struct {
	// SD is a robust standard deviation of the noise (signal units).
	SD float64
	// PeakToPeak is the range h of the background noise used for the
	// signal-to-noise ratio S/N = 2H/h (signal units).
	PeakToPeak float64
	// Method says how it was estimated ("blocks" or "window").
	Method string
	// FromMin and ToMin bound the window used, for the "window" method.
	FromMin, ToMin float64
	// BlockMin is the block length for the "blocks" method.
	BlockMin float64
}

// Peak is one detected chromatographic peak. Indices refer to the trace
// samples; figures are filled in by the integrate step.
type Peak struct {
	// Start, Apex and End are sample indices (Start < Apex < End).
	Start, Apex, End int
	// StartDrop and EndDrop are true where the boundary is a perpendicular
	// drop at a valley shared with a neighbouring peak.
	StartDrop, EndDrop bool

	// RT is the retention time of the apex in minutes, interpolated.
	RT float64
	// Height is the apex height above the baseline (signal units).
	Height float64
	// Area is the area above the baseline in signal·s.
	Area float64
	// WidthHalf is the width at 50 % of the height (min); 0 if not measurable.
	WidthHalf float64
	// Width5 is the width at 5 % of the height (min); 0 if not measurable.
	Width5 float64
	// Tailing is the symmetry (tailing) factor W0.05/(2f); 0 if not measurable.
	Tailing float64
	// Plates is the plate number from the half-height width; 0 if not measurable.
	Plates float64
	// SNR is the signal-to-noise ratio 2H/h.
	SNR float64
	// Resolution is the resolution from the previous peak (half-height
	// widths); 0 for the first peak or when not measurable.
	Resolution float64

	// Component is the name of the component this peak was identified as,
	// or "" for an unknown.
	Component string
	// Percent is the quantified result in percent (set by quantify).
	Percent float64
	// Reported is false when Percent is below the reporting threshold.
	Reported bool
}

// Component status values.
const (
	Found       = "found"
	NotDetected = "not-detected"
	Ambiguous   = "ambiguous"
)

// Component is a named compound the pipeline looks for.
type Component struct {
	Name string
	// ExpectedRT is the expected retention time (min).
	ExpectedRT float64
	// Window is the half-width of the retention window (min), absolute.
	Window float64
	// RRF is the relative response factor that divides the area (1 = as the
	// reference compound).
	RRF float64
	// Main marks the main component (the product itself).
	Main bool

	// Status is Found, NotDetected or Ambiguous.
	Status string
	// Peak indexes Run.Peaks when Status is Found, else -1.
	Peak int
	// Candidates lists the retention times of every peak inside the window
	// when the match was ambiguous.
	Candidates []float64
}

// Quantitation records how the percentages were computed.
type Quantitation struct {
	// Method is "area-percent" or "normalized".
	Method string
	// UnknownRRF is the response factor applied to unknown peaks.
	UnknownRRF float64
	// ReportingThreshold is the percent below which a peak is not reported.
	ReportingThreshold float64
	// TotalArea is the sum of (corrected) areas that the percentages divide.
	TotalArea float64
}

// ErrNeeds is wrapped by a step that finds the run state lacking what it needs.
var ErrNeeds = errors.New("missing input from an earlier step")

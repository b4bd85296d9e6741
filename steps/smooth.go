package steps

import (
	"context"
	"fmt"

	"lotgate/steps/dsp"
)

// Smoothing methods.
const (
	SavitzkyGolay = "savitzky-golay"
	MovingAverage = "moving-average"
)

// Smooth replaces the working signal by a smoothed copy: a Savitzky–Golay
// filter (least-squares polynomial of Order over Window points, edges fitted
// rather than padded) or a centred moving average over Window points.
type Smooth struct {
	Method string
	Window int
	Order  int
}

// Name implements Step.
func (s *Smooth) Name() string { return "smooth" }

// Run implements Step.
func (s *Smooth) Run(_ context.Context, r *Run) error {
	var (
		out []float64
		err error
	)
	switch s.Method {
	case SavitzkyGolay:
		out, err = dsp.SavitzkyGolay(r.Processed, s.Window, s.Order, 0, 1)
	case MovingAverage:
		out, err = dsp.MovingAverage(r.Processed, s.Window)
	default:
		return fmt.Errorf("smooth: unknown method %q", s.Method)
	}
	if err != nil {
		return fmt.Errorf("smooth: %w", err)
	}
	r.Processed = out
	return nil
}

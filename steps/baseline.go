package steps

import (
	"context"
	"fmt"

	"lotgate/steps/dsp"
)

// Baseline estimates the baseline under the working signal by asymmetric
// least squares (Eilers & Boelens, 2005) in the robust form of dsp.AsLS,
// which keeps a dominant main peak from lifting the baseline.
type Baseline struct {
	Lambda     float64
	Asymmetry  float64
	Iterations int
	Tolerance  float64
	// Clip is the clipping level in noise SDs: points further above the
	// baseline get no weight in dsp.AsLS, and the baseline is then centred
	// in the noise by dsp.Centre. A negative value gives textbook AsLS
	// (no clipping, no centring); 0 selects dsp.DefaultClip.
	Clip float64
}

// Name implements Step.
func (b *Baseline) Name() string { return "baseline" }

// Run implements Step.
func (b *Baseline) Run(_ context.Context, r *Run) error {
	z, it, err := dsp.AsLS(r.Processed, dsp.AsLSOptions{
		Lambda:    b.Lambda,
		Asymmetry: b.Asymmetry,
		MaxIter:   b.Iterations,
		Tol:       b.Tolerance,
		Clip:      b.Clip,
	})
	if err != nil {
		return fmt.Errorf("baseline: %w", err)
	}
	if b.Clip >= 0 {
		clip := b.Clip
		if clip == 0 {
			clip = dsp.DefaultClip
		}
		if _, err := dsp.Centre(r.Processed, z, b.Lambda, clip, b.Iterations); err != nil {
			return fmt.Errorf("baseline: %w", err)
		}
	}
	r.Baseline = z
	r.Warnings = appendIf(r.Warnings, it >= b.Iterations && b.Iterations > 0,
		fmt.Sprintf("baseline: asymmetric least squares stopped at the iteration limit of %d (its weights may not have settled)", b.Iterations))
	return nil
}

func appendIf(ws []string, cond bool, msg string) []string {
	if cond {
		return append(ws, msg)
	}
	return ws
}

package steps

import (
	"context"
	"errors"
	"fmt"
	"math"

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
	// MaxPoints bounds the points the baseline is computed on: a longer
	// trace is first reduced to the means of blocks of k points (the
	// smallest k that leaves at most MaxPoints), with λ divided by k⁴ so the
	// baseline's stiffness per minute is unchanged, and the result is
	// interpolated linearly back to every sample. A baseline varies slowly,
	// so this changes it by far less than the noise while making the step
	// k times faster. 0 means no reduction.
	MaxPoints int
}

// Name implements Step.
func (b *Baseline) Name() string { return "baseline" }

// Run implements Step.
func (b *Baseline) Run(_ context.Context, r *Run) error {
	y, lambda, k := r.Processed, b.Lambda, 1
	if n := len(y); b.MaxPoints > 0 && n > b.MaxPoints {
		k = (n + b.MaxPoints - 1) / b.MaxPoints
		y = dsp.BlockMeans(y, k)
		lambda /= math.Pow(float64(k), 4)
	}
	z, it, err := dsp.AsLS(y, dsp.AsLSOptions{
		Lambda:    lambda,
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
		if _, err := dsp.Centre(y, z, lambda, clip, b.Tolerance, b.Iterations); errors.Is(err, dsp.ErrCentreSkipped) {
			r.Warn(fmt.Sprintf("baseline: %v; the asymmetric least squares baseline is used as it is", err))
		} else if err != nil {
			return fmt.Errorf("baseline: %w", err)
		}
	}
	if k > 1 {
		if z, err = dsp.ExpandLinear(z, k, len(r.Processed)); err != nil {
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

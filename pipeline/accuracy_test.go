package pipeline

import (
	"context"
	"math"
	"path/filepath"
	"testing"
	"time"

	"lotgate/examples"
	"lotgate/examples/synth"
	"lotgate/steps/dsp"
)

// The demo pipeline measures the demo chromatograms' peaks against their
// synthetic truth: every peak outside the ignore window is found, at the
// apex of its EMG, with its area within 0.5 % (the requirement at high S/N)
// plus three times the area's own noise, σ_A = σ·√N·Δt for N samples of
// white noise of SD σ (common practice) — trace impurities of 0.003 %
// included. The truth is the generator's own input; the EMG apex is located
// numerically on dsp.EMG.
func TestDemoAccuracy(t *testing.T) {
	p, err := Load(filepath.Join("..", "examples", examples.Pipeline))
	if err != nil {
		t.Fatal(err)
	}
	worst := 0.0
	for _, c := range synth.Demo() {
		rec, err := p.ProcessFile(context.Background(), filepath.Join("..", "examples", "data", c.File), time.Unix(0, 0))
		if err != nil {
			t.Fatal(err)
		}
		want := 0
		for _, tr := range c.Truth() {
			if tr.Mu < 1.5 { // the ignored air peak
				continue
			}
			want++
			apex := emgApex(tr)
			var found *PeakRec
			for i := range rec.Peaks {
				if math.Abs(rec.Peaks[i].RTMin-apex) < 0.005 {
					found = &rec.Peaks[i]
				}
			}
			if found == nil {
				t.Errorf("%s: no peak at %.4f min", c.File, apex)
				continue
			}
			rel := math.Abs(found.Area-tr.Area) / tr.Area
			worst = max(worst, rel)
			samples := (found.EndMin - found.StartMin) / rec.Trace.IntervalMin
			sigmaA := synth.NoiseSD * math.Sqrt(samples) * rec.Trace.IntervalMin * 60
			if tol := 0.005 + 3*sigmaA/tr.Area; rel > tol {
				t.Errorf("%s: peak at %.3f min has area %.4g, truth %.4g (%.2f %%, allowed %.2f %%)", c.File, apex, found.Area, tr.Area, 100*rel, 100*tol)
			}
		}
		if len(rec.Peaks) != want {
			t.Errorf("%s: %d peaks, truth has %d", c.File, len(rec.Peaks), want)
		}
	}
	t.Logf("worst relative area error over the demo peaks: %.3f %%", 100*worst)
}

// emgApex finds the time of an EMG's maximum to 1e-6 min by golden-section search.
func emgApex(tr synth.Truth) float64 {
	f := func(x float64) float64 { return dsp.EMG(x, 1, tr.Mu, tr.Sigma, tr.Tau) }
	a, b := tr.Mu-tr.Sigma, tr.Mu+tr.Tau+tr.Sigma
	g := (math.Sqrt(5) - 1) / 2
	for b-a > 1e-7 {
		c, d := b-g*(b-a), a+g*(b-a)
		if f(c) > f(d) {
			b = d
		} else {
			a = c
		}
	}
	return (a + b) / 2
}

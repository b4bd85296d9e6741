package steps

import (
	"context"
	"fmt"
)

// Quantitation methods.
const (
	AreaPercent = "area-percent"
	Normalized  = "normalized"
)

// Quantify turns peak areas into percentages.
//
// area-percent: 100·A_i / ΣA. normalized: each area is divided by its
// relative response factor first (the component's RRF, UnknownRRF for
// unknowns), 100·(A_i/f_i) / Σ(A_j/f_j). Every integrated peak is in the
// denominator; a peak whose percent is below ReportingThreshold is marked not
// reported (Peak.Reported false): it is not shown as a number and not summed
// into totals.
type Quantify struct {
	Method             string
	UnknownRRF         float64
	ReportingThreshold float64
}

// Name implements Step.
func (s *Quantify) Name() string { return "quantify" }

// Run implements Step.
func (s *Quantify) Run(_ context.Context, r *Run) error {
	if !r.Ran("integrate") {
		return fmt.Errorf("quantify: %w: peak areas (add an integrate step before quantify)", ErrNeeds)
	}
	rrf := map[string]float64{}
	for _, c := range r.Components {
		rrf[c.Name] = c.RRF
	}
	corrected := make([]float64, len(r.Peaks))
	total := 0.0
	for i, p := range r.Peaks {
		a := p.Area
		if s.Method == Normalized {
			f := s.UnknownRRF
			if p.Component != "" {
				f = rrf[p.Component]
			}
			a /= f
		}
		corrected[i] = a
		total += a
	}
	for i := range r.Peaks {
		p := &r.Peaks[i]
		p.Percent = 0
		if total > 0 {
			p.Percent = 100 * corrected[i] / total
		}
		p.Reported = p.Percent >= s.ReportingThreshold
	}
	r.Quant = &Quantitation{
		Method:             s.Method,
		UnknownRRF:         s.UnknownRRF,
		ReportingThreshold: s.ReportingThreshold,
		TotalArea:          total,
	}
	return nil
}

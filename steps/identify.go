package steps

import (
	"context"
	"fmt"
	"strconv"
)

// Identify names peaks by retention time: a peak belongs to a component when
// its apex lies within the component's window (expected rt ± Window min).
// Exactly one peak in the window: found. None: not detected. More than one:
// ambiguous — nothing is assigned, the candidates are recorded and a warning
// is raised, because guessing would put the wrong peak on a certificate.
// Peaks that no component claims stay unknowns.
type Identify struct {
	// Components are the declarations; Run copies them into the run state.
	Components []Component
}

// Name implements Step.
func (s *Identify) Name() string { return "identify" }

// Run implements Step.
func (s *Identify) Run(_ context.Context, r *Run) error {
	if !r.Ran("integrate") {
		return fmt.Errorf("identify: %w: integrated peaks (add detect and integrate steps before identify)", ErrNeeds)
	}
	for i := range r.Peaks {
		r.Peaks[i].Component = ""
	}
	r.Components = make([]Component, len(s.Components))
	for ci, decl := range s.Components {
		c := decl
		c.Peak, c.Candidates = -1, nil
		var hits []int
		for pi, p := range r.Peaks {
			if p.RT >= c.ExpectedRT-c.Window && p.RT <= c.ExpectedRT+c.Window {
				hits = append(hits, pi)
			}
		}
		switch len(hits) {
		case 0:
			c.Status = NotDetected
		case 1:
			c.Status = Found
			c.Peak = hits[0]
			r.Peaks[hits[0]].Component = c.Name
		default:
			c.Status = Ambiguous
			msg := fmt.Sprintf("identify: %d peaks lie in the window of %q (%s ± %s min), at", len(hits), c.Name,
				fmtMin(c.ExpectedRT), fmtMin(c.Window))
			for _, h := range hits {
				c.Candidates = append(c.Candidates, r.Peaks[h].RT)
				msg += " " + fmtMin(r.Peaks[h].RT)
			}
			r.Warn(msg + " min; none was assigned")
		}
		r.Components[ci] = c
	}
	return nil
}

// Ran reports whether a step of that name has run.
func (r *Run) Ran(name string) bool {
	for _, d := range r.Done {
		if d == name {
			return true
		}
	}
	return false
}

func fmtMin(x float64) string { return strconv.FormatFloat(x, 'f', 3, 64) }

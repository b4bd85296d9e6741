package steps

import (
	"context"
	"errors"
	"math"
	"strings"
	"testing"
)

func integrated(rts ...float64) *Run {
	r := NewRun(Trace{Time: []float64{0, 1}, Signal: []float64{0, 0}}, nil)
	for _, rt := range rts {
		r.Peaks = append(r.Peaks, Peak{RT: rt, Area: 1})
	}
	r.Done = []string{"detect", "integrate"}
	return r
}

func TestIdentify(t *testing.T) {
	comps := []Component{
		{Name: "a", ExpectedRT: 3.00, Window: 0.05, RRF: 1},
		{Name: "b", ExpectedRT: 5.00, Window: 0.05, RRF: 1},
		{Name: "c", ExpectedRT: 8.00, Window: 0.10, RRF: 1},
	}
	cases := []struct {
		name   string
		rts    []float64
		status []string
		warn   bool
	}{
		{"all found at the window edges", []float64{2.95, 5.05, 8.0}, []string{Found, Found, Found}, false},
		{"just outside", []float64{2.9499, 5.0501, 7.5}, []string{NotDetected, NotDetected, NotDetected}, false},
		{"two in one window", []float64{3.0, 7.95, 8.05}, []string{Found, NotDetected, Ambiguous}, true},
		{"no peaks", nil, []string{NotDetected, NotDetected, NotDetected}, false},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			r := integrated(c.rts...)
			if err := (&Identify{Components: comps}).Run(context.Background(), r); err != nil {
				t.Fatal(err)
			}
			for i, want := range c.status {
				got := r.Components[i]
				if got.Status != want {
					t.Errorf("%s: %s, want %s", got.Name, got.Status, want)
				}
				if want == Found && r.Peaks[got.Peak].Component != got.Name {
					t.Errorf("%s: peak not named", got.Name)
				}
				if want != Found && got.Peak != -1 {
					t.Errorf("%s: peak %d assigned though %s", got.Name, got.Peak, want)
				}
			}
			if hasWarn := len(r.Warnings) > 0; hasWarn != c.warn {
				t.Errorf("warnings %v", r.Warnings)
			}
			if c.warn && !strings.Contains(r.Warnings[0], "7.950 8.050") {
				t.Errorf("warning should list the candidates: %s", r.Warnings[0])
			}
		})
	}
}

func TestIdentifyNeedsIntegrate(t *testing.T) {
	r := NewRun(Trace{Time: []float64{0, 1}, Signal: []float64{0, 0}}, nil)
	if err := (&Identify{}).Run(context.Background(), r); !errors.Is(err, ErrNeeds) {
		t.Fatalf("want ErrNeeds, got %v", err)
	}
	if err := (&Quantify{}).Run(context.Background(), r); !errors.Is(err, ErrNeeds) {
		t.Fatalf("want ErrNeeds, got %v", err)
	}
}

// Normalization with relative response factors: amount ∝ area / RRF, then
// normalized to 100 % (common practice; the response-factor equations of
// check-values.md §5 [M]).
func TestQuantify(t *testing.T) {
	cases := []struct {
		name      string
		method    string
		areas     []float64
		comps     []string
		rrf       map[string]float64
		unknown   float64
		threshold float64
		want      []float64
		reported  []bool
	}{
		{"area percent ignores factors", AreaPercent, []float64{300, 100}, []string{"x", ""},
			map[string]float64{"x": 0.5}, 2, 0, []float64{75, 25}, []bool{true, true}},
		{"normalized divides by the factor", Normalized, []float64{100, 50}, []string{"x", "y"},
			map[string]float64{"x": 1, "y": 0.5}, 1, 0, []float64{50, 50}, []bool{true, true}},
		{"unknowns take unknown_rrf", Normalized, []float64{100, 100}, []string{"x", ""},
			map[string]float64{"x": 1}, 4, 0, []float64{80, 20}, []bool{true, true}},
		{"threshold", Normalized, []float64{9990, 9, 1}, []string{"", "", ""},
			nil, 1, 0.05, []float64{99.9, 0.09, 0.01}, []bool{true, true, false}},
		{"no peaks", Normalized, nil, nil, nil, 1, 0, nil, nil},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			r := integrated()
			for i, a := range c.areas {
				r.Peaks = append(r.Peaks, Peak{Area: a, Component: c.comps[i]})
			}
			for name, f := range c.rrf {
				r.Components = append(r.Components, Component{Name: name, RRF: f})
			}
			q := &Quantify{Method: c.method, UnknownRRF: c.unknown, ReportingThreshold: c.threshold}
			if err := q.Run(context.Background(), r); err != nil {
				t.Fatal(err)
			}
			for i, p := range r.Peaks {
				if math.Abs(p.Percent-c.want[i]) > 1e-12 || p.Reported != c.reported[i] {
					t.Errorf("peak %d: %v%% reported %v; want %v%% %v", i, p.Percent, p.Reported, c.want[i], c.reported[i])
				}
			}
		})
	}
}

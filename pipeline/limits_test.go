package pipeline

import (
	"testing"

	"lotgate/steps"
)

// A processed run built by hand: a main peak, two named impurities (one
// below the reporting threshold), two unknowns, and a component that was not
// detected.
func handRun() *steps.Run {
	r := steps.NewRun(steps.Trace{Time: []float64{0, 1}, Signal: []float64{0, 0}}, map[string]string{"water": "0.025", "sample_type": "sample"})
	r.Peaks = []steps.Peak{
		{RT: 3.1, Area: 10, Component: "a", Percent: 0.040, Reported: true},
		{RT: 4.2, Area: 5, Percent: 0.021, Reported: true},
		{RT: 6.4, Area: 9000, Component: "main", Percent: 99.90, Reported: true},
		{RT: 7.7, Area: 7, Percent: 0.035, Reported: true},
		{RT: 8.8, Area: 1, Component: "b", Percent: 0.004, Reported: false},
	}
	r.Components = []steps.Component{
		{Name: "main", Main: true, Status: steps.Found, Peak: 2},
		{Name: "a", Status: steps.Found, Peak: 0},
		{Name: "b", Status: steps.Found, Peak: 4},
		{Name: "c-d", Status: steps.NotDetected, Peak: -1},
		{Name: "e", Status: steps.Ambiguous, Peak: -1},
	}
	r.Quant = &steps.Quantitation{Method: steps.Normalized}
	r.Done = []string{"detect", "integrate", "identify", "quantify"}
	return r
}

func TestLimitExpressions(t *testing.T) {
	cases := []struct {
		name, body       string
		status, reported string
	}{
		{"main min", "value = component.main.percent\n min = 99.80", "pass", "99.90"},
		{"named max", "value = component.a.percent\n max = 0.030", "fail", "0.040"},
		// Below the reporting threshold: passes a max, shown as such.
		{"below threshold", "value = component.b.percent\n max = 0.010", "pass", "below reporting threshold"},
		{"below threshold min", "value = component.b.percent\n min = 0.001", "fail", "below reporting threshold"},
		{"not detected hyphen name", "value = component.c-d.percent\n max = 0.01", "pass", "not detected"},
		{"ambiguous", "value = component.e.percent\n max = 0.01", "pass", "ambiguous identification"},
		{"arithmetic on missing", "value = component.c-d.percent * 2\n max = 0.01", "pass", "not detected"},
		// 0.040 + 0.021 + 0.035 = 0.096: the main peak and the unreported
		// peak are not summed.
		{"total impurities", "value = total_impurities\n max = 0.10", "pass", "0.10"},
		{"largest unknown", "value = largest_unknown\n max = 0.030", "fail", "0.035"},
		{"named impurities", "value = named_impurities\n max = 0.05", "pass", "0.04"},
		{"meta as number", "value = meta.water\n max = 0.030", "pass", "0.025"},
		{"meta not a number", "value = meta.sample_type\n max = 1", "error", "cannot compute: meta.sample_type is not a number"},
		{"peak count", "value = peak_count\n max = 4", "fail", "5"},
		{"unknown component", "value = component.zz.percent\n max = 1", "error", ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			src := minimal + "limit \"x\" {\n " + c.body + "\n}\n"
			p, err := Parse([]byte(src), "m.hcl")
			if err != nil {
				t.Fatal(err)
			}
			res := checkLimits(p.Limits, handRun())
			if len(res) != 1 {
				t.Fatalf("%d results", len(res))
			}
			got := res[0]
			if got.Status != c.status || (c.reported != "" && got.Reported != c.reported && got.Reason != c.reported) {
				t.Errorf("got status %q reported %q reason %q; want %q %q", got.Status, got.Reported, got.Reason, c.status, c.reported)
			}
		})
	}
}

func TestLimitWhen(t *testing.T) {
	src := minimal + `limit "blank only" {
  value = peak_count
  max   = 0
  when  = meta.sample_type == "blank"
}
limit "samples" {
  value = peak_count
  max   = 9
  when  = meta.sample_type == "sample"
}
limit "bad when" {
  value = peak_count
  max   = 9
  when  = meta.nothing == "x"
}
`
	p, err := Parse([]byte(src), "m.hcl")
	if err != nil {
		t.Fatal(err)
	}
	res := checkLimits(p.Limits, handRun())
	if len(res) != 2 || res[0].Name != "samples" || res[0].Status != "pass" || res[1].Status != "error" {
		t.Fatalf("when: %+v", res)
	}
}

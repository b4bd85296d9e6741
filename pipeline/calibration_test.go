package pipeline

import (
	"errors"
	"path/filepath"
	"strings"
	"testing"

	"lotgate/examples"
	"lotgate/rules"
	"lotgate/steps/calib"
)

// withComponents is a pipeline that declares components a, b and c.
const withComponents = minimal + `detect {
}
integrate {
}
identify {
  component "a" {
    rt     = 2
    window = 0.1
  }
  component "b" {
    rt     = 3
    window = 0.1
  }
  component "c" {
    rt     = 4
    window = 0.1
  }
}
`

func TestNightPipelineBlocks(t *testing.T) {
	p, err := Load(filepath.Join("..", "examples", examples.NightPipelineFile))
	if err != nil {
		t.Fatal(err)
	}
	c := p.Calibration
	if c == nil || c.Method != ExternalStandard || c.Unit != "mg/kg" || len(c.Components) != 2 {
		t.Fatalf("calibration: %+v", c)
	}
	bz := c.Components[0]
	if bz.Name != "benzene" || bz.Model != "linear" || bz.Weighting != calib.InverseX || bz.MaxDeviation != 10 || bz.MaxDeviationLowest != 15 || bz.MinR2 != 0.995 {
		t.Errorf("benzene inherits the block's settings: %+v", bz)
	}
	s := p.Suitability
	if s == nil || s.Constants != "pharmacopoeia" || s.NoiseWindow != 5 || s.Noise != NoiseFromBlank || len(s.Gates) != 7 {
		t.Fatalf("suitability: %+v", s)
	}
	if g := s.Gates[0]; g.Kind != GateResolution || strings.Join(g.Components, ",") != "p-xylene,m-xylene" || *g.Min != 1.5 {
		t.Errorf("resolution gate: %+v", g)
	}
	if g := s.Gates[4]; g.Kind != GatePrecision || *g.MaxRSD != 2 || g.MinInjections != 5 {
		t.Errorf("precision gate: %+v", g)
	}
	r := p.Replicates
	if r == nil || r.Count != 3 || r.MaxRSD != 5 || r.MaxRSDFor("Largest unknown") != 10 || r.MaxRSDFor("Benzene") != 5 {
		t.Errorf("replicates: %+v", r)
	}
	// Every setting, defaults included, is kept for the lot record.
	if c.Settings["method"] != "external" || s.Settings["noise"] != "blank" || r.Settings["count"] != 3 {
		t.Errorf("settings: %v %v %v", c.Settings, s.Settings, r.Settings)
	}
	if gates, ok := s.Settings["gates"].([]map[string]any); !ok || len(gates) != 7 || gates[6]["gate"] != GateDrift {
		t.Errorf("gate settings: %v", s.Settings["gates"])
	}
}

// Every mistake in the sequence-level blocks is a diagnostic at its line.
func TestSequenceBlockDiagnostics(t *testing.T) {
	cal := func(body string) string { return withComponents + "calibration {\n  unit = \"mg/L\"\n" + body + "}\n" }
	suit := func(body string) string { return withComponents + "suitability {\n" + body + "}\n" }
	cases := []struct {
		name, src string
		line      int
		want      string
	}{
		{"calibration before identify", minimal + "calibration {\n  unit = \"mg/L\"\n  component \"a\" {}\n}\n", 4, "must come after the identify step"},
		{"no unit", withComponents + "calibration {\n  component \"a\" {}\n}\n", 22, "unit"},
		{"unknown component", cal("  component \"bb\" {}\n"), 24, `did you mean "b"?`},
		{"no component", cal(""), 22, "at least one component"},
		{"model typo", cal("  model = \"lineer\"\n  component \"a\" {}\n"), 24, `did you mean "linear"?`},
		{"weighting", cal("  weighting = \"1/y\"\n  component \"a\" {}\n"), 24, `"1/y" is not known`},
		{"internal without standard", cal("  method = \"internal\"\n  component \"a\" {}\n"), 24, "needs internal_standard"},
		{"internal standard calibrated", cal("  method = \"internal\"\n  internal_standard = \"a\"\n  component \"a\" {}\n"), 26, "is the internal standard"},
		{"calibrated twice", cal("  component \"a\" {}\n  component \"a\" {}\n"), 25, "calibrated twice"},
		{"response factor weighted", cal("  component \"a\" {\n    model = \"response-factor\"\n    weighting = \"1/x\"\n  }\n"), 26, "has no weighting"},
		{"r2", cal("  min_r2 = 1\n  component \"a\" {}\n"), 24, "min_r2 must be from 0"},
		{"duplicate", cal("  component \"a\" {}\n") + "calibration {\n  unit = \"x\"\n  component \"a\" {}\n}\n", 26, "Duplicate calibration block"},
		{"no gate", suit(""), 22, "at least one gate"},
		{"noise window", suit("  noise_window = 0.5\n  drift {\n    max = 5\n  }\n"), 23, "from 1 to 100"},
		{"noise source", suit("  noise = \"blnak\"\n  drift {\n    max = 5\n  }\n"), 23, `did you mean "blank"?`},
		{"resolution pair", suit("  resolution {\n    between = [\"a\", \"a\"]\n    min = 1.5\n  }\n"), 24, "two different components"},
		{"resolution unknown", suit("  resolution {\n    between = [\"a\", \"x\"]\n    min = 1.5\n  }\n"), 24, `"x" is not a component`},
		{"symmetry bounds", suit("  symmetry {\n    component = \"a\"\n  }\n"), 23, "needs min, max or both"},
		{"symmetry order", suit("  symmetry {\n    component = \"a\"\n    min = 2\n    max = 1\n  }\n"), 25, "above max"},
		{"plates min", suit("  plates {\n    component = \"a\"\n  }\n"), 23, "Missing required argument"},
		{"precision both", suit("  precision {\n    component = \"a\"\n    max_rsd = 2\n    upper_limit = 102\n  }\n"), 23, "one of them"},
		{"precision upper", suit("  precision {\n    component = \"a\"\n    upper_limit = 99\n  }\n"), 25, "above 100"},
		{"blank thresholds", suit("  blank {\n    components = [\"a\"]\n  }\n"), 23, "needs max_snr, max_area or both"},
		{"drift max", suit("  drift {\n    max = 0\n  }\n"), 24, "greater than 0"},
		{"gate typo", suit("  plate {\n    component = \"a\"\n    min = 1\n  }\n"), 23, `Did you mean "plates"?`},
		{"replicates count", minimal + "replicates {\n  count = 0\n}\n", 5, "count must be from 1 to 100"},
		{"replicate rule twice", minimal + "replicates {\n  count = 2\n  result \"x\" {\n    max_rsd = 1\n  }\n  result \"x\" {\n    max_rsd = 2\n  }\n}\n", 9, "set twice"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Parse([]byte(c.src), "method.hcl")
			var pe *Error
			if !errors.As(err, &pe) {
				t.Fatalf("want a diagnostic error, got %v", err)
			}
			found := false
			for _, d := range pe.Diags {
				if d.Subject != nil && d.Subject.Start.Line == c.line && strings.Contains(d.Summary+" "+d.Detail, c.want) {
					found = true
				}
			}
			if !found {
				t.Errorf("no diagnostic at line %d containing %q:\n%s", c.line, c.want, pe.Error())
			}
		})
	}
}

// Limits see calibrated amounts as component.NAME.amount: a number, a
// missing value that passes a maximum, or a problem that makes the limit
// an error; a component without calibration is an error naming it.
func TestEvalLimitsWithAmounts(t *testing.T) {
	src := withComponents + `calibration {
  unit = "mg/L"
  component "a" {}
  component "b" {}
}
limit "a" {
  value = component.a.amount
  max   = 10
}
limit "b" {
  value = component["b"].amount
  max   = 10
}
limit "c" {
  value = component.c.amount
  max   = 10
}
limit "a if big" {
  value = component.a.amount * 2
  max   = 10
  when  = component.a.amount > 1
}
`
	p, err := Parse([]byte(src), "m.hcl")
	if err != nil {
		t.Fatal(err)
	}
	one, two := 1, 2
	rec := &Record{
		Peaks: []PeakRec{{Number: 1, Component: "a", RTMin: 2, Area: 5}, {Number: 2, Component: "b", RTMin: 3, Area: 7}},
		Components: []ComponentRec{{Name: "a", Status: "found", Peak: &one}, {Name: "b", Status: "found", Peak: &two},
			{Name: "c", Status: "not-detected"}},
	}
	cases := []struct {
		name    string
		amounts map[string]Amount
		want    []string // status: reported or reason, per limit evaluated
	}{
		{"numbers", map[string]Amount{"a": {X: 4.26}, "b": {X: 12}},
			[]string{"pass: 4", "fail: 12 is above the maximum 10", "error: component.c.amount: \"c\" is not calibrated", "pass: 9"}},
		{"missing", map[string]Amount{"a": {Missing: "below the calibrated range (< 2 mg/L)"}, "b": {Missing: "not detected"}},
			[]string{"pass: below the calibrated range (< 2 mg/L)", "pass: not detected", "error: component.c.amount: \"c\" is not calibrated",
				"error: when: component.a.amount has no value: below the calibrated range"}},
		{"problem", map[string]Amount{"a": {Problem: "12 mg/L is above the calibrated range"}, "b": {X: 1}},
			[]string{"error: a amount: 12 mg/L is above the calibrated range", "pass: 1", "error: component.c.amount", "error: when: a amount: 12"}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			vals := p.EvalLimits(rec, c.amounts)
			if len(vals) != len(c.want) {
				t.Fatalf("%d limits evaluated, want %d", len(vals), len(c.want))
			}
			for i, v := range vals {
				r := v.Result()
				got := r.Status + ": " + r.Reported
				if r.Status != rules.Pass && r.Reason != "" {
					got = r.Status + ": " + r.Reason
				}
				if !strings.HasPrefix(got, c.want[i]) {
					t.Errorf("limit %q: %q, want %q…", v.Def.Name, got, c.want[i])
				}
				if lr := LimitRecOf(v.Def, r); lr.Name != v.Def.Name || lr.Expr != v.Def.Expr || lr.Status != r.Status {
					t.Errorf("record form: %+v", lr)
				}
			}
		})
	}
}

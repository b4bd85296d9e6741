package pipeline

import (
	"fmt"
	"slices"

	"github.com/hashicorp/hcl/v2"

	"lotgate/steps"
	"lotgate/steps/dsp"
)

// stepKind describes one step block: its schema, the steps that must come
// before it, and the decoder that turns the block into a steps.Step.
type stepKind struct {
	schema *hcl.BodySchema
	needs  []string
	decode func(a *attrs) steps.Step
}

// registry maps a step block type to its kind. Adding a step is one file in
// steps/ and one entry here.
var registry = map[string]stepKind{
	"smooth": {
		schema: &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
			{Name: "method"}, {Name: "window"}, {Name: "order"},
		}},
		decode: decodeSmooth,
	},
	"baseline": {
		schema: &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
			{Name: "method"}, {Name: "lambda"}, {Name: "asymmetry"}, {Name: "iterations"},
			{Name: "tolerance"}, {Name: "clip"}, {Name: "max_points"},
		}},
		decode: decodeBaseline,
	},
	"detect": {
		schema: &hcl.BodySchema{
			Attributes: []hcl.AttributeSchema{
				{Name: "min_snr"}, {Name: "min_width"}, {Name: "min_height"}, {Name: "min_area"},
				{Name: "noise_block"}, {Name: "slope_window"},
			},
			Blocks: []hcl.BlockHeaderSchema{{Type: "ignore"}, {Type: "noise"}},
		},
		decode: decodeDetect,
	},
	"integrate": {
		schema: &hcl.BodySchema{Attributes: []hcl.AttributeSchema{{Name: "constants"}}},
		needs:  []string{"detect"},
		decode: decodeIntegrate,
	},
	"identify": {
		schema: &hcl.BodySchema{
			Blocks: []hcl.BlockHeaderSchema{{Type: "component", LabelNames: []string{"name"}}},
		},
		needs:  []string{"integrate"},
		decode: decodeIdentify,
	},
	"quantify": {
		schema: &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
			{Name: "method"}, {Name: "unknown_rrf"}, {Name: "reporting_threshold"},
		}},
		needs:  []string{"integrate"},
		decode: decodeQuantify,
	},
}

// stepTypes returns the registered step block types, sorted.
func stepTypes() []string {
	var ts []string
	for t := range registry {
		ts = append(ts, t)
	}
	slices.Sort(ts)
	return ts
}

func decodeSmooth(a *attrs) steps.Step {
	s := &steps.Smooth{
		Method: a.str("method", steps.SavitzkyGolay, steps.SavitzkyGolay, steps.MovingAverage),
		Window: a.integer("window", 9, func(n int) string {
			if n < 5 || n > 101 || n%2 == 0 {
				return fmt.Sprintf("window must be an odd number of points from 5 to 101, not %d", n)
			}
			return ""
		}),
	}
	if s.Method == steps.SavitzkyGolay {
		s.Order = a.integer("order", 2, intRange("order", 0, 6))
		if s.Order >= s.Window {
			a.fail("order", fmt.Sprintf("order %d must be less than the window of %d points", s.Order, s.Window))
		}
	} else if _, ok := a.content.Attributes["order"]; ok {
		a.fail("order", "order applies to the savitzky-golay method only")
	}
	return s
}

func decodeBaseline(a *attrs) steps.Step {
	a.str("method", "asls", "asls")
	return &steps.Baseline{
		Lambda: a.num("lambda", 1e7, positive("lambda")),
		Asymmetry: a.num("asymmetry", 0.001, func(p float64) string {
			if p <= 0 || p >= 0.5 {
				return fmt.Sprintf("asymmetry must lie between 0 and 0.5 (typically 0.001 to 0.05), not %g", p)
			}
			return ""
		}),
		Iterations: a.integer("iterations", 50, intRange("iterations", 1, 1000)),
		Tolerance:  a.num("tolerance", 0.01, nonNegative("tolerance")),
		Clip: a.num("clip", dsp.DefaultClip, func(x float64) string {
			if x == 0 {
				return "clip must not be 0: give the clipping level in noise SDs (3 by default), or a negative number for textbook AsLS"
			}
			return ""
		}),
		MaxPoints: a.integer("max_points", 4000, func(n int) string {
			if n != 0 && n < 100 {
				return fmt.Sprintf("max_points must be 0 (no reduction) or at least 100, not %d", n)
			}
			return ""
		}),
	}
}

var windowSchema = &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
	{Name: "from", Required: true}, {Name: "to", Required: true},
}}

func decodeWindow(parent *attrs, b *hcl.Block) steps.Window {
	a := newAttrs(b, windowSchema)
	w := steps.Window{From: a.num("from", 0, nonNegative("from")), To: a.num("to", 0, nonNegative("to"))}
	if w.To <= w.From {
		a.fail("to", fmt.Sprintf("to (%g min) must be later than from (%g min)", w.To, w.From))
	}
	parent.diags = append(parent.diags, a.diags...)
	return w
}

func decodeDetect(a *attrs) steps.Step {
	d := &steps.Detect{
		MinSNR:     a.num("min_snr", 3, positive("min_snr")),
		MinWidth:   a.num("min_width", 0, nonNegative("min_width")),
		MinHeight:  a.num("min_height", 0, nonNegative("min_height")),
		MinArea:    a.num("min_area", 0, nonNegative("min_area")),
		NoiseBlock: a.num("noise_block", 1.0, positive("noise_block")),
		SlopeWindow: a.integer("slope_window", 0, func(n int) string {
			if n != 0 && (n < 5 || n > 101 || n%2 == 0) {
				return fmt.Sprintf("slope_window must be 0 (automatic) or an odd number of points from 5 to 101, not %d", n)
			}
			return ""
		}),
	}
	var ignore []map[string]float64
	for _, b := range a.blocks("ignore") {
		w := decodeWindow(a, b)
		d.Ignore = append(d.Ignore, w)
		ignore = append(ignore, map[string]float64{"from": w.From, "to": w.To})
	}
	if len(ignore) > 0 {
		a.record("ignore", ignore)
	}
	if nb := a.blocks("noise"); len(nb) > 0 {
		w := decodeWindow(a, nb[0])
		d.NoiseWindow = &w
		a.record("noise", map[string]float64{"from": w.From, "to": w.To})
		for _, extra := range nb[1:] {
			a.diags = append(a.diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Duplicate noise block",
				Detail: "detect takes one noise window", Subject: extra.DefRange.Ptr()})
		}
	}
	return d
}

func decodeIntegrate(a *attrs) steps.Step {
	return &steps.Integrate{Constants: a.str("constants", "pharmacopoeia", "pharmacopoeia", "exact")}
}

var componentSchema = &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
	{Name: "rt", Required: true}, {Name: "window"}, {Name: "window_percent"}, {Name: "rrf"}, {Name: "main"},
}}

func decodeIdentify(a *attrs) steps.Step {
	s := &steps.Identify{}
	seen := map[string]bool{}
	mains := 0
	for _, b := range a.blocks("component") {
		ca := newAttrs(b, componentSchema)
		c := steps.Component{Name: b.Labels[0]}
		c.ExpectedRT = ca.num("rt", 0, positive("rt"))
		abs, hasAbs := ca.optNum("window", positive("window"))
		pct, hasPct := ca.optNum("window_percent", positive("window_percent"))
		switch {
		case hasAbs && hasPct:
			ca.fail("window_percent", "give window (min) or window_percent, not both")
		case hasAbs:
			c.Window = abs
		case hasPct:
			c.Window = c.ExpectedRT * pct / 100
		default:
			ca.fail("", "a component needs a retention window: window (min) or window_percent (% of rt)")
		}
		c.RRF = ca.num("rrf", 1, positive("rrf"))
		c.Main = ca.boolean("main", false)
		if c.Main {
			mains++
			if mains > 1 {
				ca.fail("main", "only one component can be the main component")
			}
		}
		if seen[c.Name] {
			ca.fail("", fmt.Sprintf("component %q is declared twice", c.Name))
		}
		seen[c.Name] = true
		for _, o := range s.Components {
			if c.ExpectedRT-c.Window <= o.ExpectedRT+o.Window && o.ExpectedRT-o.Window <= c.ExpectedRT+c.Window {
				ca.fail("rt", fmt.Sprintf("the retention window of %q (%g ± %g min) overlaps that of %q (%g ± %g min); a peak must belong to one component",
					c.Name, c.ExpectedRT, c.Window, o.Name, o.ExpectedRT, o.Window))
			}
		}
		a.diags = append(a.diags, ca.diags...)
		a.record("component "+c.Name, settingsMap(ca.settings))
		s.Components = append(s.Components, c)
	}
	if len(s.Components) == 0 {
		a.fail("", "identify needs at least one component block")
	}
	return s
}

func decodeQuantify(a *attrs) steps.Step {
	return &steps.Quantify{
		Method:             a.str("method", steps.Normalized, steps.AreaPercent, steps.Normalized),
		UnknownRRF:         a.num("unknown_rrf", 1, positive("unknown_rrf")),
		ReportingThreshold: a.num("reporting_threshold", 0, nonNegative("reporting_threshold")),
	}
}

// settingsMap turns nested settings into a map for the record (encoding/json
// writes map keys sorted, so the output stays deterministic).
func settingsMap(ss []Setting) map[string]any {
	m := make(map[string]any, len(ss))
	for _, s := range ss {
		m[s.Name] = s.Value
	}
	return m
}

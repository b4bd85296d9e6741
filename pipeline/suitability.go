package pipeline

import (
	"fmt"

	"github.com/hashicorp/hcl/v2"
	"github.com/zclconf/go-cty/cty"

	"lotgate/steps"
)

// Kinds of system-suitability gate, as written in the suitability block.
const (
	GateResolution    = "resolution"
	GateSymmetry      = "symmetry"
	GatePlates        = "plates"
	GateSignalToNoise = "signal_to_noise"
	GatePrecision     = "precision"
	GateBlank         = "blank"
	GateDrift         = "drift"
)

// Noise sources for the signal-to-noise gate.
const (
	// NoiseFromBlank measures the noise range in the blank injection
	// nearest before the suitability injection, around the peak's
	// retention time.
	NoiseFromBlank = "blank"
	// NoiseFromInjection measures it in the suitability injection itself,
	// on both sides of the peak.
	NoiseFromInjection = "injection"
)

// Suitability is the pipeline's suitability block: the system-suitability
// gates a sequence must pass before its samples' results may be used.
type Suitability struct {
	// Constants is steps.ConstantsPharmacopoeia (N = 5.54·(tR/wh)²,
	// Rs = 1.18·Δt/(wh1 + wh2)) or steps.ConstantsExact (8 ln 2 and
	// √(2 ln 2)).
	Constants string
	// NoiseWindow is the length of the noise window of the signal-to-noise
	// gate in half-height widths of the peak (5 by default; 20 in the 2022
	// harmonised text).
	NoiseWindow float64
	// Noise is NoiseFromBlank or NoiseFromInjection.
	Noise string
	// Gates are the gates in the order written.
	Gates []Gate
	// Settings are every setting as used, for the lot record.
	Settings map[string]any
}

// Gate is one system-suitability criterion. Which fields apply depends on
// Kind; bounds that are not set are nil.
type Gate struct {
	Kind string
	// Components: the pair (resolution), the one peak (symmetry, plates,
	// signal_to_noise, precision), the components checked (blank), or the
	// components compared (drift; empty means every calibrated one).
	Components []string
	// Min and Max bound the figure (resolution, symmetry, plates,
	// signal_to_noise; drift has Max, in % of the opening response).
	Min, Max *float64
	// MaxRSD is the precision gate's fixed RSD limit (%); UpperLimit the
	// upper assay limit (%) from which the Ph. Eur. 2.2.46 maximum RSD is
	// computed instead. MinInjections is the least number of suitability
	// injections the precision gate needs.
	MaxRSD, UpperLimit *float64
	MinInjections      int
	// MaxSNR and MaxArea are the blank gate's thresholds: a peak at a named
	// component with a higher S/N or area makes the blank unclean.
	MaxSNR, MaxArea *float64
}

// Name describes the gate for tables and reasons, e.g.
// "resolution p-xylene / m-xylene".
func (g Gate) Name() string {
	switch g.Kind {
	case GateResolution:
		if len(g.Components) == 2 {
			return "resolution " + g.Components[0] + " / " + g.Components[1]
		}
	case GateSymmetry:
		return "symmetry factor " + first(g.Components)
	case GatePlates:
		return "plate number " + first(g.Components)
	case GateSignalToNoise:
		return "signal-to-noise " + first(g.Components)
	case GatePrecision:
		return "injection precision " + first(g.Components)
	case GateBlank:
		return "blank cleanliness"
	case GateDrift:
		return "bracketing drift"
	}
	return g.Kind
}

func first(xs []string) string {
	if len(xs) == 0 {
		return ""
	}
	return xs[0]
}

var suitabilitySchema = &hcl.BodySchema{
	Attributes: []hcl.AttributeSchema{{Name: "constants"}, {Name: "noise_window"}, {Name: "noise"}},
	Blocks: []hcl.BlockHeaderSchema{
		{Type: GateResolution}, {Type: GateSymmetry}, {Type: GatePlates}, {Type: GateSignalToNoise},
		{Type: GatePrecision}, {Type: GateBlank}, {Type: GateDrift},
	},
}

// gateSchemas lists each gate's attributes.
var gateSchemas = map[string]*hcl.BodySchema{
	GateResolution: {Attributes: []hcl.AttributeSchema{{Name: "between", Required: true}, {Name: "min", Required: true}}},
	GateSymmetry:   {Attributes: []hcl.AttributeSchema{{Name: "component", Required: true}, {Name: "min"}, {Name: "max"}}},
	GatePlates:     {Attributes: []hcl.AttributeSchema{{Name: "component", Required: true}, {Name: "min", Required: true}}},
	GateSignalToNoise: {Attributes: []hcl.AttributeSchema{
		{Name: "component", Required: true}, {Name: "min", Required: true}}},
	GatePrecision: {Attributes: []hcl.AttributeSchema{
		{Name: "component", Required: true}, {Name: "max_rsd"}, {Name: "upper_limit"}, {Name: "min_injections"}}},
	GateBlank: {Attributes: []hcl.AttributeSchema{{Name: "components", Required: true}, {Name: "max_snr"}, {Name: "max_area"}}},
	GateDrift: {Attributes: []hcl.AttributeSchema{{Name: "max", Required: true}, {Name: "components"}}},
}

func (p *Pipeline) decodeSuitability(b *hcl.Block) hcl.Diagnostics {
	a := newAttrs(b, suitabilitySchema)
	declared := p.needIdentify(a)
	s := &Suitability{
		Constants: a.str("constants", steps.ConstantsPharmacopoeia, steps.ConstantsPharmacopoeia, steps.ConstantsExact),
		NoiseWindow: a.num("noise_window", 5, func(x float64) string {
			if x < 1 || x > 100 {
				return fmt.Sprintf("noise_window is a number of half-height widths from 1 to 100 (5 by default, 20 in the 2022 harmonised text), not %g", x)
			}
			return ""
		}),
		Noise: a.str("noise", NoiseFromBlank, NoiseFromBlank, NoiseFromInjection),
	}
	var gates []map[string]any
	for _, gb := range a.content.Blocks {
		ga := newAttrs(gb, gateSchemas[gb.Type])
		g := decodeGate(ga, declared)
		a.diags = append(a.diags, ga.diags...)
		m := settingsMap(ga.settings)
		m["gate"] = gb.Type
		gates = append(gates, m)
		s.Gates = append(s.Gates, g)
	}
	if len(s.Gates) == 0 {
		a.fail("", "suitability needs at least one gate: resolution, symmetry, plates, signal_to_noise, precision, blank or drift")
	}
	if len(gates) > 0 {
		a.record("gates", gates)
	}
	s.Settings = settingsMap(a.settings)
	p.Suitability = s
	return a.diags
}

// decodeGate reads one gate block.
func decodeGate(a *attrs, declared []string) Gate {
	g := Gate{Kind: a.block.Type}
	one := func() {
		if name := a.str("component", ""); name != "" && componentName(a, "component", name, declared) {
			g.Components = []string{name}
		}
	}
	bound := func(name string, check func(float64) string) *float64 {
		if x, ok := a.optNum(name, check); ok {
			return &x
		}
		return nil
	}
	switch g.Kind {
	case GateResolution:
		g.Components = a.names("between", declared)
		if len(g.Components) != 2 || g.Components[0] == g.Components[1] {
			a.fail("between", `between names two different components, e.g. ["p-xylene", "m-xylene"]`)
		}
		g.Min = bound("min", positive("min"))
	case GateSymmetry:
		one()
		g.Min, g.Max = bound("min", positive("min")), bound("max", positive("max"))
		switch {
		case g.Min == nil && g.Max == nil:
			a.fail("", "a symmetry gate needs min, max or both (0.8 and 1.8 are the pharmacopoeial defaults)")
		case g.Min != nil && g.Max != nil && *g.Min > *g.Max:
			a.fail("min", fmt.Sprintf("min (%g) is above max (%g)", *g.Min, *g.Max))
		}
	case GatePlates, GateSignalToNoise:
		one()
		g.Min = bound("min", positive("min"))
	case GatePrecision:
		one()
		g.MaxRSD = bound("max_rsd", positive("max_rsd"))
		g.UpperLimit = bound("upper_limit", func(x float64) string {
			if x <= 100 || x > 200 {
				return fmt.Sprintf("upper_limit is the upper assay limit in %%, above 100 (e.g. 102.0), not %g", x)
			}
			return ""
		})
		if (g.MaxRSD == nil) == (g.UpperLimit == nil) {
			a.fail("", "a precision gate needs max_rsd (a fixed limit, %) or upper_limit (the upper assay limit, % — the Ph. Eur. 2.2.46 maximum RSD is computed from it), one of them")
		}
		g.MinInjections = a.integer("min_injections", 5, intRange("min_injections", 2, 100))
	case GateBlank:
		g.Components = a.names("components", declared)
		if len(g.Components) == 0 {
			a.fail("components", "components names at least one component that must not show in the blank")
		}
		g.MaxSNR = bound("max_snr", positive("max_snr"))
		g.MaxArea = bound("max_area", nonNegative("max_area"))
		if g.MaxSNR == nil && g.MaxArea == nil {
			a.fail("", "a blank gate needs max_snr, max_area or both: the largest peak accepted at the named components")
		}
	case GateDrift:
		g.Max = bound("max", positive("max"))
		if _, ok := a.content.Attributes["components"]; ok {
			g.Components = a.names("components", declared)
		}
	}
	return g
}

// names reads a list of component names, each checked against declared.
func (a *attrs) names(name string, declared []string) []string {
	v, attr, ok := a.value(name, cty.List(cty.String))
	if !ok {
		return nil
	}
	var out []string
	for _, e := range v.AsValueSlice() {
		if e.IsNull() {
			a.errorAt(attr, name+" must not contain null")
			continue
		}
		n := e.AsString()
		if componentName(a, name, n, declared) {
			out = append(out, n)
		}
	}
	a.record(name, out)
	return out
}

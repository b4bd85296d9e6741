package pipeline

import (
	"fmt"
	"slices"
	"strings"

	"github.com/hashicorp/hcl/v2"
	"github.com/zclconf/go-cty/cty"

	"lotgate/rules"
	"lotgate/steps"
	"lotgate/steps/calib"
)

// Calibration methods.
const (
	// ExternalStandard reads amounts from the component's own peak area.
	ExternalStandard = "external"
	// InternalStandard reads amounts from the ratio of the component's peak
	// area to that of the internal standard, added at the same amount to
	// every standard and sample.
	InternalStandard = "internal"
)

// ResponseFactorModel is the single-point calibration: the mean response
// factor (response/amount) of the standard injections of one level; its
// calibrated range runs from 0 to that level.
const ResponseFactorModel = "response-factor"

// Calibration is the pipeline's calibration block: how the calibrated
// components' amounts are read from their responses in a sequence.
type Calibration struct {
	// Method is ExternalStandard or InternalStandard.
	Method string
	// InternalStandardName is the internal standard's component (Method
	// InternalStandard only).
	InternalStandardName string
	// Unit is the amount unit of the standards and of the results.
	Unit string
	// Components are the calibrated components, in the order declared.
	Components []CalComponent
	// Settings are every setting as used, defaults included, for the lot
	// record.
	Settings map[string]any
}

// CalComponent is one calibrated component and the curve fitted to it.
type CalComponent struct {
	Name string
	// Model is a calib.Model or ResponseFactorModel.
	Model string
	// Weighting is the least-squares weighting (calib.Unweighted for the
	// response-factor model).
	Weighting calib.Weighting
	// MaxDeviation is the largest accepted |back-calculated − nominal| in %
	// of the nominal amount at every level but the lowest, and
	// MaxDeviationLowest at the lowest level.
	MaxDeviation, MaxDeviationLowest float64
	// MinR2 is the least accepted coefficient of determination (0: none).
	MinR2 float64
}

var calibrationSchema = &hcl.BodySchema{
	Attributes: []hcl.AttributeSchema{
		{Name: "method"}, {Name: "internal_standard"}, {Name: "unit", Required: true},
		{Name: "model"}, {Name: "weighting"}, {Name: "max_deviation"}, {Name: "max_deviation_lowest"},
		{Name: "min_r2"},
	},
	Blocks: []hcl.BlockHeaderSchema{{Type: "component", LabelNames: []string{"name"}}},
}

var calComponentSchema = &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
	{Name: "model"}, {Name: "weighting"}, {Name: "max_deviation"}, {Name: "max_deviation_lowest"}, {Name: "min_r2"},
}}

var calModels = []string{string(calib.LinearOrigin), string(calib.Linear), string(calib.Quadratic), ResponseFactorModel}

var calWeightings = []string{string(calib.Unweighted), string(calib.InverseX), string(calib.InverseXSquared)}

// identified returns the components declared by the identify step decoded
// so far, in declaration order, or nil when there is none yet.
func (p *Pipeline) identified() []string {
	for _, st := range p.Steps {
		if id, ok := st.(*steps.Identify); ok {
			names := make([]string, len(id.Components))
			for i, c := range id.Components {
				names[i] = c.Name
			}
			return names
		}
	}
	return nil
}

// needIdentify reports the block as out of order when no identify step
// precedes it, and returns the declared components.
func (p *Pipeline) needIdentify(a *attrs) []string {
	names := p.identified()
	if names == nil {
		a.diags = append(a.diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Block out of order",
			Detail: fmt.Sprintf("the %s block names components, so it must come after the identify step that declares them",
				a.block.Type),
			Subject: a.block.DefRange.Ptr()})
	}
	return names
}

// componentName checks that name is a declared component; it reports the
// problem on attr (or the block) and returns false otherwise.
func componentName(a *attrs, attr, name string, declared []string) bool {
	if declared == nil || slices.Contains(declared, name) {
		return true
	}
	msg := fmt.Sprintf("%q is not a component of the identify step", name)
	if near := nearest(name, declared); near != "" {
		msg += fmt.Sprintf("; did you mean %q?", near)
	} else {
		msg += "; declared: " + quoteList(declared)
	}
	a.fail(attr, msg)
	return false
}

func (p *Pipeline) decodeCalibration(b *hcl.Block) hcl.Diagnostics {
	a := newAttrs(b, calibrationSchema)
	declared := p.needIdentify(a)
	c := &Calibration{
		Method: a.str("method", ExternalStandard, ExternalStandard, InternalStandard),
		Unit:   a.str("unit", ""),
	}
	if _, ok := a.content.Attributes["unit"]; ok && strings.TrimSpace(c.Unit) == "" {
		a.fail("unit", `unit must name the amount unit of the standards, e.g. "mg/kg"`)
	}
	if c.Method == InternalStandard {
		c.InternalStandardName = a.str("internal_standard", "")
		if c.InternalStandardName == "" {
			a.fail("method", `the internal standard method needs internal_standard = "COMPONENT"`)
		} else {
			componentName(a, "internal_standard", c.InternalStandardName, declared)
		}
	} else if _, ok := a.content.Attributes["internal_standard"]; ok {
		a.fail("internal_standard", `internal_standard applies to method = "internal" only`)
	}
	def := CalComponent{
		Model:        a.str("model", string(calib.Linear), calModels...),
		Weighting:    calib.Weighting(a.str("weighting", string(calib.Unweighted), calWeightings...)),
		MaxDeviation: a.num("max_deviation", 15, positive("max_deviation")),
	}
	def.MaxDeviationLowest = a.num("max_deviation_lowest", def.MaxDeviation, positive("max_deviation_lowest"))
	def.MinR2 = a.num("min_r2", 0, r2Range)
	if def.Model == ResponseFactorModel && def.Weighting != calib.Unweighted {
		a.fail("weighting", "the response-factor model has no weighting: it averages one level's response factors")
	}
	seen := map[string]bool{}
	for _, cb := range a.blocks("component") {
		ca := newAttrs(cb, calComponentSchema)
		cc := CalComponent{
			Name:         cb.Labels[0],
			Model:        ca.str("model", def.Model, calModels...),
			Weighting:    calib.Weighting(ca.str("weighting", string(def.Weighting), calWeightings...)),
			MaxDeviation: ca.num("max_deviation", def.MaxDeviation, positive("max_deviation")),
		}
		cc.MaxDeviationLowest = ca.num("max_deviation_lowest", def.MaxDeviationLowest, positive("max_deviation_lowest"))
		cc.MinR2 = ca.num("min_r2", def.MinR2, r2Range)
		if cc.Model == ResponseFactorModel && cc.Weighting != calib.Unweighted {
			if _, own := ca.content.Attributes["weighting"]; own {
				ca.fail("weighting", "the response-factor model has no weighting: it averages one level's response factors")
			}
			cc.Weighting = calib.Unweighted
		}
		switch {
		case seen[cc.Name]:
			ca.fail("", fmt.Sprintf("component %q is calibrated twice", cc.Name))
		case cc.Name == c.InternalStandardName:
			ca.fail("", fmt.Sprintf("%q is the internal standard: its response is the reference, it is not calibrated", cc.Name))
		default:
			componentName(ca, "", cc.Name, declared)
		}
		seen[cc.Name] = true
		a.diags = append(a.diags, ca.diags...)
		a.record("component "+cc.Name, settingsMap(ca.settings))
		c.Components = append(c.Components, cc)
	}
	if len(c.Components) == 0 {
		a.fail("", `calibration needs at least one component "NAME" { } block naming a calibrated component`)
	}
	c.Settings = settingsMap(a.settings)
	p.Calibration = c
	return a.diags
}

// Suggest returns the candidate that s is most likely a typo of (by edit
// distance), or "" when none is close.
func Suggest(s string, candidates []string) string { return nearest(s, candidates) }

func r2Range(x float64) string {
	if x < 0 || x >= 1 {
		return fmt.Sprintf("min_r2 must be from 0 (no requirement) up to but not including 1, not %g", x)
	}
	return ""
}

// Replicates is the pipeline's replicates block: how many injections of a
// sample make a result and how far apart they may lie.
type Replicates struct {
	// Count is the number of replicate injections each sample needs.
	Count int
	// MaxRSD is the largest accepted relative standard deviation (%) of a
	// result's replicate values; 0: no limit.
	MaxRSD float64
	// Results override MaxRSD for named limits.
	Results []ReplicateRule
	// Settings are every setting as used, for the lot record.
	Settings map[string]any
}

// ReplicateRule is the replicate spread allowed for one limit.
type ReplicateRule struct {
	// Limit names a limit block.
	Limit  string
	MaxRSD float64
	// Range is where the rule is written, for messages.
	Range hcl.Range
}

// MaxRSDFor returns the spread limit (%) for the named limit; 0 is none.
func (r *Replicates) MaxRSDFor(limit string) float64 {
	for _, x := range r.Results {
		if x.Limit == limit {
			return x.MaxRSD
		}
	}
	return r.MaxRSD
}

var replicatesSchema = &hcl.BodySchema{
	Attributes: []hcl.AttributeSchema{{Name: "count", Required: true}, {Name: "max_rsd"}},
	Blocks:     []hcl.BlockHeaderSchema{{Type: "result", LabelNames: []string{"limit"}}},
}

var replicateRuleSchema = &hcl.BodySchema{Attributes: []hcl.AttributeSchema{{Name: "max_rsd", Required: true}}}

func (p *Pipeline) decodeReplicates(b *hcl.Block) hcl.Diagnostics {
	a := newAttrs(b, replicatesSchema)
	r := &Replicates{
		Count:  a.integer("count", 1, intRange("count", 1, 100)),
		MaxRSD: a.num("max_rsd", 0, nonNegative("max_rsd")),
	}
	for _, rb := range a.blocks("result") {
		ra := newAttrs(rb, replicateRuleSchema)
		rule := ReplicateRule{Limit: rb.Labels[0], MaxRSD: ra.num("max_rsd", 0, nonNegative("max_rsd")), Range: rb.DefRange}
		if slices.ContainsFunc(r.Results, func(o ReplicateRule) bool { return o.Limit == rule.Limit }) {
			ra.fail("", fmt.Sprintf("the replicate spread of %q is set twice", rule.Limit))
		}
		a.diags = append(a.diags, ra.diags...)
		a.record("result "+rule.Limit, settingsMap(ra.settings))
		r.Results = append(r.Results, rule)
	}
	r.Settings = settingsMap(a.settings)
	p.Replicates = r
	return a.diags
}

// Amount is what a sequence found for one calibrated component in one
// injection, as the limit expressions see it (component.NAME.amount).
type Amount struct {
	// X is the amount, valid when Missing and Problem are both "".
	X float64
	// Missing says why there is no number, as for a percent: "not
	// detected", "below the calibrated range (< 20 mg/kg)". A missing
	// amount passes a maximum-only limit.
	Missing string
	// Problem says why no amount may be given at all (above the
	// calibrated range, a failed calibration): a limit that uses the amount
	// is an error.
	Problem string
}

// LimitValue is one limit evaluated on one injection.
type LimitValue struct {
	Def   *LimitDef
	Value rules.Value
	// Problem is not empty when the value could not be computed; the
	// limit is then an error with this reason.
	Problem string
}

// Result checks the value against the limit.
func (v LimitValue) Result() rules.Result {
	if v.Problem != "" {
		return rules.Errored(v.Def.Limit, v.Problem)
	}
	return v.Def.Limit.Check(v.Value)
}

// EvalLimits evaluates the pipeline's limits on a processed record, with
// the calibrated amounts (keyed by component) added to the expressions as
// component.NAME.amount. Limits whose when-expression is false are left
// out, as for a single file; the others keep the pipeline's order. A limit
// that uses the amount of a component that is not calibrated, or whose
// amount has a Problem, gets that problem.
func (p *Pipeline) EvalLimits(rec *Record, amounts map[string]Amount) []LimitValue {
	ctx := evalContext(runOf(rec))
	comps := ctx.Variables["component"].AsValueMap()
	for name, c := range comps {
		am, ok := amounts[name]
		if !ok || am.Problem != "" {
			continue
		}
		attrs := c.AsValueMap()
		if am.Missing != "" {
			attrs["amount"] = missing(am.Missing)
		} else {
			attrs["amount"] = num(am.X)
		}
		comps[name] = cty.ObjectVal(attrs)
	}
	if len(comps) > 0 {
		ctx.Variables["component"] = cty.ObjectVal(comps)
	}
	var out []LimitValue
	for _, d := range p.Limits {
		if d.When != nil {
			if problem := p.amountProblem(d.When, amounts); problem != "" {
				out = append(out, LimitValue{Def: d, Problem: "when: " + problem})
				continue
			}
			v, diags := d.When.Value(ctx)
			if diags.HasErrors() {
				out = append(out, LimitValue{Def: d, Problem: "when: " + whenProblem(d.When, ctx, diags)})
				continue
			}
			v, _ = v.Unmark()
			if v.IsNull() || !v.Type().Equals(cty.Bool) {
				out = append(out, LimitValue{Def: d, Problem: "when: must be true or false"})
				continue
			}
			if v.False() {
				continue
			}
		}
		if problem := p.amountProblem(d.Value, amounts); problem != "" {
			out = append(out, LimitValue{Def: d, Problem: problem})
			continue
		}
		v, problem := valueOf(d, ctx)
		out = append(out, LimitValue{Def: d, Value: v, Problem: problem})
	}
	return out
}

// whenProblem says why a when-expression could not be evaluated, naming a
// missing input when there is one.
func whenProblem(expr hcl.Expression, ctx *hcl.EvalContext, diags hcl.Diagnostics) string {
	for _, tr := range expr.Variables() {
		if v, d := tr.TraverseAbs(ctx); !d.HasErrors() && v.IsNull() {
			return fmt.Sprintf("%s has no value: %s", traversalText(tr), reasonText(v))
		}
	}
	return firstDiag(diags)
}

// traversalText writes a traversal as it reads in an expression.
func traversalText(tr hcl.Traversal) string {
	var b strings.Builder
	for _, step := range tr {
		switch s := step.(type) {
		case hcl.TraverseRoot:
			b.WriteString(s.Name)
		case hcl.TraverseAttr:
			b.WriteString("." + s.Name)
		case hcl.TraverseIndex:
			if s.Key.Type() == cty.String && s.Key.IsKnown() && !s.Key.IsNull() {
				fmt.Fprintf(&b, "[%q]", s.Key.AsString())
			} else {
				b.WriteString("[…]")
			}
		}
	}
	return b.String()
}

// LimitRecOf is the record's form of a limit checked with Result.
func LimitRecOf(d *LimitDef, r rules.Result) LimitRec {
	return buildLimits([]*LimitDef{d}, []rules.Result{r})[0]
}

// amountProblem returns why an expression cannot use the amounts it names:
// a component without calibration, or an amount with a Problem.
func (p *Pipeline) amountProblem(expr hcl.Expression, amounts map[string]Amount) string {
	for _, tr := range expr.Variables() {
		if tr.RootName() != "component" || len(tr) < 3 {
			continue
		}
		var name string
		switch s := tr[1].(type) {
		case hcl.TraverseAttr:
			name = s.Name
		case hcl.TraverseIndex:
			if s.Key.Type() != cty.String || !s.Key.IsKnown() || s.Key.IsNull() {
				continue
			}
			name = s.Key.AsString()
		default:
			continue
		}
		if at, ok := tr[2].(hcl.TraverseAttr); !ok || at.Name != "amount" {
			continue
		}
		am, ok := amounts[name]
		switch {
		case !ok:
			return fmt.Sprintf("component.%s.amount: %q is not calibrated (the calibration block has no component %q)", name, name, name)
		case am.Problem != "":
			return fmt.Sprintf("%s amount: %s", name, am.Problem)
		}
	}
	return ""
}

// runOf rebuilds, from a record, the run state that limit expressions read:
// peaks, components, quantitation and metadata.
func runOf(rec *Record) *steps.Run {
	r := &steps.Run{Meta: make(map[string]string, len(rec.Sample.Metadata))}
	for _, m := range rec.Sample.Metadata {
		r.Meta[m.Key] = m.Value
	}
	r.Peaks = make([]steps.Peak, len(rec.Peaks))
	for i, pk := range rec.Peaks {
		r.Peaks[i] = steps.Peak{RT: pk.RTMin, Height: pk.Height, Area: pk.Area, Component: pk.Component, Reported: pk.Reported}
		if pk.Percent != nil {
			r.Peaks[i].Percent = *pk.Percent
		}
	}
	r.Components = make([]steps.Component, len(rec.Components))
	for i, c := range rec.Components {
		sc := steps.Component{Name: c.Name, Main: c.Main, Status: c.Status, Peak: -1}
		if c.Peak != nil && *c.Peak >= 1 && *c.Peak <= len(rec.Peaks) {
			sc.Peak = *c.Peak - 1
		} else if sc.Status == steps.Found {
			sc.Status = steps.NotDetected // a record without its peak cannot give its figures
		}
		r.Components[i] = sc
	}
	if q := rec.Quant; q != nil {
		r.Quant = &steps.Quantitation{Method: q.Method, UnknownRRF: q.UnknownRRF, ReportingThreshold: q.ReportingThreshold, TotalArea: q.TotalArea}
	}
	return r
}

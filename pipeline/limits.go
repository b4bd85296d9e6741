package pipeline

import (
	"fmt"
	"math"
	"regexp"
	"slices"
	"strings"

	"github.com/hashicorp/hcl/v2"
	"github.com/zclconf/go-cty/cty"
	"github.com/zclconf/go-cty/cty/convert"

	"lotgate/rules"
	"lotgate/steps"
)

// LimitDef is a limit block: the specification line and the expressions
// that give its value (and whether it applies) once a file is processed.
type LimitDef struct {
	rules.Limit
	Value hcl.Expression
	When  hcl.Expression // nil: always applies
	// Expr is the value expression's source text, for the record.
	Expr string
}

var limitSchema = &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
	{Name: "value", Required: true}, {Name: "min"}, {Name: "max"}, {Name: "digits"},
	{Name: "unit"}, {Name: "rounding"}, {Name: "when"},
}}

var plainDecimal = regexp.MustCompile(`^-?[0-9]+(\.[0-9]+)?$`)

// decodeLimit reads a limit block. Min and max keep their decimal text as
// written ("99.50" stays two decimals), since a limit is significant to the
// last digit shown; digits defaults to the larger number of decimals written.
func decodeLimit(b *hcl.Block, src []byte) (*LimitDef, hcl.Diagnostics) {
	a := newAttrs(b, limitSchema)
	l := &LimitDef{Limit: rules.Limit{Name: b.Labels[0]}}
	if v, ok := a.content.Attributes["value"]; ok {
		l.Value = v.Expr
		l.Expr = strings.TrimSpace(string(v.Expr.Range().SliceBytes(src)))
	}
	if w, ok := a.content.Attributes["when"]; ok {
		l.When = w.Expr
	}
	decimals := 0
	bound := func(name string) string {
		attr, ok := a.content.Attributes[name]
		if !ok {
			return ""
		}
		x := a.num(name, 0, nil)
		text := strings.TrimSpace(string(attr.Expr.Range().SliceBytes(src)))
		if !plainDecimal.MatchString(text) {
			var err error
			if text, err = rules.Decimal(x); err != nil {
				a.errorAt(attr, err.Error())
				return ""
			}
		}
		if i := strings.IndexByte(text, '.'); i >= 0 {
			decimals = max(decimals, len(text)-i-1)
		}
		return text
	}
	l.Min, l.Max = bound("min"), bound("max")
	if l.Min == "" && l.Max == "" {
		a.fail("", "a limit needs min, max or both")
	}
	l.Digits = a.integer("digits", decimals, intRange("digits", 0, 12))
	l.Unit = a.str("unit", "")
	r := a.str("rounding", string(rules.E29), string(rules.E29), string(rules.HalfUp), string(rules.Absolute))
	l.Rounding = rules.Rounding(r)
	if err := l.Limit.Validate(); err != nil && !a.diags.HasErrors() {
		a.fail("", err.Error())
	}
	return l, a.diags
}

// Missing-value reasons carried as cty marks on null values, so that a limit
// on a component that is absent can say why.
const (
	reasonNotDetected = "not detected"
	reasonBelow       = "below reporting threshold"
	reasonAmbiguous   = "ambiguous identification"
	reasonNoUnknown   = "no unknown peak reported"
	reasonNoImpurity  = "no impurity reported"
	reasonNotQuant    = "not quantified"
)

func missing(reason string) cty.Value { return cty.NullVal(cty.Number).Mark(reason) }

func num(x float64) cty.Value { return cty.NumberFloatVal(x) }

// evalContext exposes a processed run to limit expressions:
//
//	component.NAME.{percent, area, height, rt, status, found}
//	total_impurities, named_impurities, total_unknowns,
//	largest_unknown, largest_impurity, peak_count, meta.KEY
func evalContext(r *steps.Run) *hcl.EvalContext {
	quantified := r.Quant != nil
	comps := map[string]cty.Value{}
	for _, c := range r.Components {
		obj := map[string]cty.Value{
			"status": cty.StringVal(c.Status),
			"found":  cty.BoolVal(c.Status == steps.Found),
		}
		reason := reasonNotDetected
		if c.Status == steps.Ambiguous {
			reason = reasonAmbiguous
		}
		if c.Status == steps.Found {
			p := r.Peaks[c.Peak]
			obj["area"], obj["height"], obj["rt"] = num(p.Area), num(p.Height), num(p.RT)
			switch {
			case !quantified:
				obj["percent"] = missing(reasonNotQuant)
			case p.Reported:
				obj["percent"] = num(p.Percent)
			default:
				obj["percent"] = missing(reasonBelow)
			}
		} else {
			for _, k := range []string{"area", "height", "rt", "percent"} {
				obj[k] = missing(reason)
			}
		}
		comps[c.Name] = cty.ObjectVal(obj)
	}
	main := ""
	for _, c := range r.Components {
		if c.Main {
			main = c.Name
		}
	}
	t := totalsOf(r, main)
	vars := map[string]cty.Value{
		"component":  cty.ObjectVal(comps),
		"peak_count": num(float64(len(r.Peaks))),
		"meta":       metaValue(r.Meta),
	}
	if quantified {
		vars["total_impurities"] = num(t.TotalImpurities)
		vars["named_impurities"] = num(t.NamedImpurities)
		vars["total_unknowns"] = num(t.TotalUnknowns)
		vars["largest_unknown"] = orMissing(t.LargestUnknown, reasonNoUnknown)
		vars["largest_impurity"] = orMissing(t.LargestImpurity, reasonNoImpurity)
	} else {
		for _, k := range []string{"total_impurities", "named_impurities", "total_unknowns", "largest_unknown", "largest_impurity"} {
			vars[k] = missing(reasonNotQuant)
		}
	}
	return &hcl.EvalContext{Variables: vars}
}

func orMissing(x *float64, reason string) cty.Value {
	if x == nil {
		return missing(reason)
	}
	return num(*x)
}

func metaValue(m map[string]string) cty.Value {
	if len(m) == 0 {
		return cty.EmptyObjectVal
	}
	obj := make(map[string]cty.Value, len(m))
	for k, v := range m {
		obj[k] = cty.StringVal(v)
	}
	return cty.ObjectVal(obj)
}

// Totals are the aggregate results over the reported peaks. The main
// component is the one marked main; every other reported peak is an
// impurity. Peaks below the reporting threshold are not summed.
type Totals struct {
	TotalImpurities float64  `json:"total_impurities"`
	NamedImpurities float64  `json:"named_impurities"`
	TotalUnknowns   float64  `json:"total_unknowns"`
	LargestUnknown  *float64 `json:"largest_unknown"`
	LargestImpurity *float64 `json:"largest_impurity"`
	UnknownCount    int      `json:"unknown_count"`
}

func totalsOf(r *steps.Run, main string) Totals {
	var t Totals
	for _, p := range r.Peaks {
		if !p.Reported || (main != "" && p.Component == main) {
			continue
		}
		x := p.Percent
		t.TotalImpurities += x
		if t.LargestImpurity == nil || x > *t.LargestImpurity {
			t.LargestImpurity = &x
		}
		if p.Component != "" {
			t.NamedImpurities += x
			continue
		}
		t.TotalUnknowns += x
		t.UnknownCount++
		if t.LargestUnknown == nil || x > *t.LargestUnknown {
			t.LargestUnknown = &x
		}
	}
	return t
}

// checkLimits evaluates every limit against the processed run. A limit whose
// when-expression is false is skipped (and not listed); a limit whose value
// cannot be computed is an error result, which makes the verdict
// undetermined rather than letting it pass.
func checkLimits(defs []*LimitDef, r *steps.Run) []rules.Result {
	ctx := evalContext(r)
	var out []rules.Result
	for _, d := range defs {
		if d.When != nil {
			v, diags := d.When.Value(ctx)
			if diags.HasErrors() {
				out = append(out, rules.Errored(d.Limit, "when: "+firstDiag(diags)))
				continue
			}
			v, _ = v.Unmark()
			if v.IsNull() || !v.Type().Equals(cty.Bool) {
				out = append(out, rules.Errored(d.Limit, "when: must be true or false"))
				continue
			}
			if v.False() {
				continue
			}
		}
		v, problem := valueOf(d, ctx)
		if problem != "" {
			out = append(out, rules.Errored(d.Limit, problem))
			continue
		}
		out = append(out, d.Limit.Check(v))
	}
	return out
}

// valueOf evaluates a limit's value: a number, a missing value with its
// reason, or a problem that makes the limit an error.
func valueOf(d *LimitDef, ctx *hcl.EvalContext) (v rules.Value, problem string) {
	val, diags := d.Value.Value(ctx)
	if diags.HasErrors() {
		// An operation on a missing value fails inside HCL; name the
		// missing input rather than the operator when we can.
		for _, tr := range d.Value.Variables() {
			if tv, td := tr.TraverseAbs(ctx); !td.HasErrors() && tv.IsNull() {
				return rules.Value{Missing: reasonText(tv)}, ""
			}
		}
		return v, "cannot compute: " + firstDiag(diags)
	}
	if val.IsNull() {
		return rules.Value{Missing: reasonText(val)}, ""
	}
	val, _ = val.Unmark()
	nv, err := convert.Convert(val, cty.Number)
	if err != nil || nv.IsNull() {
		return v, fmt.Sprintf("cannot compute: %s is not a number", d.Expr)
	}
	x, _ := nv.AsBigFloat().Float64()
	if math.IsInf(x, 0) || math.IsNaN(x) {
		return v, "cannot compute: the value is not finite"
	}
	return rules.Value{X: x}, ""
}

func reasonText(v cty.Value) string {
	_, marks := v.Unmark()
	var rs []string
	for m := range marks {
		if s, ok := m.(string); ok {
			rs = append(rs, s)
		}
	}
	if len(rs) == 0 {
		return "no value"
	}
	slices.Sort(rs)
	return strings.Join(rs, ", ")
}

func firstDiag(d hcl.Diagnostics) string {
	for _, x := range d {
		if x.Severity == hcl.DiagError {
			s := x.Summary
			if x.Detail != "" {
				s += ": " + x.Detail
			}
			return s
		}
	}
	return "error"
}

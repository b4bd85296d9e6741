package pipeline

import (
	"fmt"
	"math"
	"slices"
	"strings"

	"github.com/hashicorp/hcl/v2"
	"github.com/zclconf/go-cty/cty"
	"github.com/zclconf/go-cty/cty/convert"
)

// Setting is one parameter of a step as it was used, defaults included. The
// record lists them so that a reader sees the whole method without the
// pipeline file.
type Setting struct {
	Name  string `json:"name"`
	Value any    `json:"value"`
}

// attrs decodes the attributes of one block into typed values, collecting
// HCL diagnostics that point at the offending attribute, and remembers every
// value it returned as a Setting.
type attrs struct {
	block    *hcl.Block
	content  *hcl.BodyContent
	diags    hcl.Diagnostics
	settings []Setting
}

func newAttrs(b *hcl.Block, schema *hcl.BodySchema) *attrs {
	content, diags := b.Body.Content(schema)
	return &attrs{block: b, content: content, diags: diags}
}

// value evaluates a constant attribute and converts it to ty; ok is false
// when the attribute is absent or broken (broken adds a diagnostic).
func (a *attrs) value(name string, ty cty.Type) (cty.Value, *hcl.Attribute, bool) {
	attr, present := a.content.Attributes[name]
	if !present {
		return cty.NilVal, nil, false
	}
	v, d := attr.Expr.Value(nil)
	a.diags = append(a.diags, d...)
	if d.HasErrors() {
		return cty.NilVal, attr, false
	}
	if v.IsNull() {
		a.errorAt(attr, fmt.Sprintf("%s must not be null", name))
		return cty.NilVal, attr, false
	}
	cv, err := convert.Convert(v, ty)
	if err != nil {
		a.errorAt(attr, fmt.Sprintf("%s must be %s: %s", name, ty.FriendlyName(), err))
		return cty.NilVal, attr, false
	}
	return cv, attr, true
}

func (a *attrs) errorAt(attr *hcl.Attribute, msg string) {
	a.diags = append(a.diags, &hcl.Diagnostic{
		Severity: hcl.DiagError,
		Summary:  "Invalid value for " + strings.SplitN(attr.Name, ".", 2)[0],
		Detail:   msg,
		Subject:  attr.Expr.Range().Ptr(),
		Context:  attr.Range.Ptr(),
	})
}

// fail reports a problem with the block as a whole (or with the named
// attribute when it is present).
func (a *attrs) fail(name, msg string) {
	if attr, ok := a.content.Attributes[name]; ok {
		a.errorAt(attr, msg)
		return
	}
	a.diags = append(a.diags, &hcl.Diagnostic{
		Severity: hcl.DiagError,
		Summary:  "Invalid " + a.block.Type + " block",
		Detail:   msg,
		Subject:  a.block.DefRange.Ptr(),
	})
}

func (a *attrs) record(name string, v any) { a.settings = append(a.settings, Setting{name, v}) }

// num returns a number attribute or def; check returns "" for a valid value
// or a message saying what is wrong.
func (a *attrs) num(name string, def float64, check func(float64) string) float64 {
	v, attr, ok := a.value(name, cty.Number)
	x := def
	if ok {
		x, _ = v.AsBigFloat().Float64()
		if math.IsInf(x, 0) {
			a.errorAt(attr, name+" is out of range")
		} else if check != nil {
			if msg := check(x); msg != "" {
				a.errorAt(attr, msg)
			}
		}
	}
	a.record(name, x)
	return x
}

// optNum is num for an attribute with no default: present reports whether it
// was given.
func (a *attrs) optNum(name string, check func(float64) string) (x float64, present bool) {
	if _, ok := a.content.Attributes[name]; !ok {
		return 0, false
	}
	return a.num(name, 0, check), true
}

func (a *attrs) integer(name string, def int, check func(int) string) int {
	v, attr, ok := a.value(name, cty.Number)
	n := def
	if ok {
		bf := v.AsBigFloat()
		i, acc := bf.Int64()
		if !bf.IsInt() || acc != 0 || i > math.MaxInt32 || i < math.MinInt32 {
			a.errorAt(attr, name+" must be a whole number")
		} else {
			n = int(i)
			if check != nil {
				if msg := check(n); msg != "" {
					a.errorAt(attr, msg)
				}
			}
		}
	}
	a.record(name, n)
	return n
}

// str returns a string attribute or def; when allowed is not empty the value
// must be one of them.
func (a *attrs) str(name, def string, allowed ...string) string {
	v, attr, ok := a.value(name, cty.String)
	s := def
	if ok {
		s = v.AsString()
		if len(allowed) > 0 && !slices.Contains(allowed, s) {
			msg := fmt.Sprintf("%s %q is not known; use one of %s", name, s, quoteList(allowed))
			if near := nearest(s, allowed); near != "" {
				msg = fmt.Sprintf("%s %q is not known; did you mean %q? (one of %s)", name, s, near, quoteList(allowed))
			}
			a.errorAt(attr, msg)
		}
	}
	if s != "" || len(allowed) > 0 {
		a.record(name, s)
	}
	return s
}

func (a *attrs) boolean(name string, def bool) bool {
	v, _, ok := a.value(name, cty.Bool)
	b := def
	if ok {
		b = v.True()
	}
	a.record(name, b)
	return b
}

// blocks returns the nested blocks of a type, in source order.
func (a *attrs) blocks(typ string) []*hcl.Block {
	var out []*hcl.Block
	for _, b := range a.content.Blocks {
		if b.Type == typ {
			out = append(out, b)
		}
	}
	return out
}

func quoteList(xs []string) string {
	q := make([]string, len(xs))
	for i, x := range xs {
		q[i] = fmt.Sprintf("%q", x)
	}
	return strings.Join(q, ", ")
}

// nearest returns the candidate closest to s by edit distance, or "" when
// none is close enough to be a likely typo.
func nearest(s string, candidates []string) string {
	best, bestD := "", 3
	for _, c := range candidates {
		if d := editDistance(s, c); d < bestD {
			best, bestD = c, d
		}
	}
	return best
}

func editDistance(a, b string) int {
	ra, rb := []rune(a), []rune(b)
	prev := make([]int, len(rb)+1)
	cur := make([]int, len(rb)+1)
	for j := range prev {
		prev[j] = j
	}
	for i := 1; i <= len(ra); i++ {
		cur[0] = i
		for j := 1; j <= len(rb); j++ {
			cost := 1
			if ra[i-1] == rb[j-1] {
				cost = 0
			}
			cur[j] = min(prev[j]+1, cur[j-1]+1, prev[j-1]+cost)
		}
		prev, cur = cur, prev
	}
	return prev[len(rb)]
}

// positive and friends are common checks.
func positive(name string) func(float64) string {
	return func(x float64) string {
		if x <= 0 {
			return fmt.Sprintf("%s must be greater than 0, not %g", name, x)
		}
		return ""
	}
}

func nonNegative(name string) func(float64) string {
	return func(x float64) string {
		if x < 0 {
			return fmt.Sprintf("%s must not be negative, not %g", name, x)
		}
		return ""
	}
}

func intRange(name string, lo, hi int) func(int) string {
	return func(n int) string {
		if n < lo || n > hi {
			return fmt.Sprintf("%s must be from %d to %d, not %d", name, lo, hi, n)
		}
		return ""
	}
}

// Package replay re-runs frozen pipelines on the raw data of past records
// and says what changed: field by field for one record (Compare), verdict
// and reported values over many (Assess), and parameter by parameter
// between two pipeline versions (DiffPipelines).
package replay

import (
	"bytes"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"lotgate/pipeline"
)

// Difference is one field whose value differs between two records.
type Difference struct {
	// Field is the field's path in the record, list elements named by their
	// name, key or step where those are unique (limits[Benzene].status,
	// peaks[benzene].area), else by index.
	Field string
	// Old and New are the values as the record writes them (strings without
	// quotes); "(absent)" when the field is missing on that side.
	Old, New string
	// Rel is the relative difference |new − old| / max(|old|, |new|) when
	// both values are numbers, else 0 with Numeric false.
	Rel     float64
	Numeric bool
	// Note adds what a single row cannot show (how many values of a long
	// list differ).
	Note string
}

// Result is the outcome of comparing two records.
type Result struct {
	// Diffs lists the differing fields in record order.
	Diffs []Difference
	// MaxRel is the largest relative difference over every pair of computed
	// numbers (not the method's settings): 0 when all are equal bit for
	// bit. MaxRelField is where it was found.
	MaxRel      float64
	MaxRelField string
}

// Same reports whether no field differs.
func (r Result) Same() bool { return len(r.Diffs) == 0 }

// Ignored lists the record fields that a replay cannot reproduce and so
// does not compare: the processing time, the tool version (warned about
// separately) and the bundle digest (checked separately).
var Ignored = []string{"provenance.processed_at", "provenance.version", "provenance.bundle_sha256"}

// Absent stands for a field one record has and the other lacks.
const Absent = "(absent)"

// Compare compares two records field by field: provenance (but Ignored),
// sample, method, units, noise, every peak, component and limit, totals,
// verdict, warnings, report settings and the trace (skipped when either
// record was stored without it). Numbers differ when they are not equal bit
// for bit, unless their relative difference is at most tol, in which case
// they still count towards MaxRel.
func Compare(old, new *pipeline.Record, tol float64) (Result, error) {
	a, err := treeOf(old)
	if err != nil {
		return Result{}, fmt.Errorf("old record: %w", err)
	}
	b, err := treeOf(new)
	if err != nil {
		return Result{}, fmt.Errorf("new record: %w", err)
	}
	c := &comparer{tol: tol}
	c.walk("", a, b)
	// The trace, the record's last and by far its largest part, is compared
	// as numbers rather than through the JSON tree.
	if ta, tb := old.Trace, new.Trace; ta != nil && tb != nil {
		if ta.Points != tb.Points {
			c.add(Difference{Field: "trace.points", Old: strconv.Itoa(ta.Points), New: strconv.Itoa(tb.Points)})
		}
		c.scalar("trace.start_min", ta.StartMin, tb.StartMin)
		c.scalar("trace.interval_min", ta.IntervalMin, tb.IntervalMin)
		c.floats("trace.raw", ta.Raw, tb.Raw)
		c.floats("trace.processed", ta.Processed, tb.Processed)
		c.floats("trace.baseline", ta.Baseline, tb.Baseline)
	}
	return c.res, nil
}

// treeOf is the record without its trace as an ordered JSON tree.
func treeOf(rec *pipeline.Record) (*node, error) {
	r := *rec
	r.Trace = nil
	data, err := r.Marshal()
	if err != nil {
		return nil, err
	}
	return parseTree(data)
}

type comparer struct {
	tol float64
	res Result
}

func (c *comparer) add(d Difference) { c.res.Diffs = append(c.res.Diffs, d) }

// number compares two numbers of the results; settings (method, report)
// are compared as written instead, since they are not computed.
// The field is field[index] when index is not negative (formatted only
// when needed: traces are long).
func (c *comparer) number(field string, index int, a, b float64) bool {
	if a == b {
		return true
	}
	r := relDiff(a, b)
	if r > c.res.MaxRel {
		c.res.MaxRel, c.res.MaxRelField = r, indexed(field, index)
	}
	return r <= c.tol
}

func indexed(field string, index int) string {
	if index < 0 {
		return field
	}
	return field + "[" + strconv.Itoa(index) + "]"
}

// setting tells the fields that hold the method's settings rather than
// results.
func setting(field string) bool {
	return strings.HasPrefix(field, "method.") || strings.HasPrefix(field, "report.")
}

// relDiff is |a − b| / max(|a|, |b|), 0 when a == b (common practice for a
// scale-free comparison of floating-point results).
func relDiff(a, b float64) float64 {
	if a == b {
		return 0
	}
	return math.Abs(a-b) / max(math.Abs(a), math.Abs(b))
}

func ignored(field string) bool { return slices.Contains(Ignored, field) || field == "trace" }

func (c *comparer) walk(field string, a, b *node) {
	if ignored(field) {
		return
	}
	switch {
	case a.kind != b.kind:
		c.add(Difference{Field: field, Old: a.String(), New: b.String()})
	case a.kind == kindNumber && setting(field):
		if a.text != b.text {
			c.add(Difference{Field: field, Old: a.text, New: b.text})
		}
	case a.kind == kindNumber:
		if !c.number(field, -1, a.num, b.num) {
			c.add(Difference{Field: field, Old: a.text, New: b.text, Rel: relDiff(a.num, b.num), Numeric: true})
		}
	case a.kind == kindObject:
		for i, k := range a.keys {
			f := join(field, k)
			if j := b.key(k); j >= 0 {
				c.walk(f, a.vals[i], b.vals[j])
			} else if !ignored(f) {
				c.add(Difference{Field: f, Old: a.vals[i].String(), New: Absent})
			}
		}
		for j, k := range b.keys {
			if a.key(k) < 0 && !ignored(join(field, k)) {
				c.add(Difference{Field: join(field, k), Old: Absent, New: b.vals[j].String()})
			}
		}
	case a.kind == kindArray:
		c.array(field, a.vals, b.vals)
	case a.text != b.text:
		c.add(Difference{Field: field, Old: a.String(), New: b.String()})
	}
}

func join(field, key string) string {
	if field == "" {
		return key
	}
	return field + "." + key
}

// array compares lists: numbers element by element (one row for a list that
// differs, at its first differing element), lists of objects by their name,
// key or step when those are unique on both sides, anything else as a whole.
func (c *comparer) array(field string, a, b []*node) {
	if allNumbers(a) && allNumbers(b) && !setting(field) {
		c.floats(field, nums(a), nums(b))
		return
	}
	ka, kb := label(a), label(b)
	if ka == nil || kb == nil {
		if len(a) != len(b) {
			c.add(Difference{Field: field, Old: (&node{kind: kindArray, vals: a}).String(), New: (&node{kind: kindArray, vals: b}).String()})
			return
		}
		for i := range a {
			c.walk(fmt.Sprintf("%s[%d]", field, i), a[i], b[i])
		}
		return
	}
	idx := map[string]int{}
	for j, k := range kb {
		idx[k] = j
	}
	seen := map[string]bool{}
	for i, k := range ka {
		f := field + "[" + k + "]"
		seen[k] = true
		if j, ok := idx[k]; ok {
			c.walk(f, a[i], b[j])
		} else {
			c.add(Difference{Field: f, Old: a[i].String(), New: Absent})
		}
	}
	for j, k := range kb {
		if !seen[k] {
			c.add(Difference{Field: field + "[" + k + "]", Old: Absent, New: b[j].String()})
		}
	}
}

// scalar compares two computed numbers.
func (c *comparer) scalar(field string, a, b float64) {
	if !c.number(field, -1, a, b) {
		c.add(Difference{Field: field, Old: numText(a), New: numText(b), Rel: relDiff(a, b), Numeric: true})
	}
}

// floats compares two lists of numbers element by element and adds one row
// for a list that differs: its first differing element, with a count.
func (c *comparer) floats(field string, a, b []float64) {
	if (a == nil) != (b == nil) || len(a) != len(b) {
		count := func(xs []float64) string {
			if xs == nil {
				return "null"
			}
			return fmt.Sprintf("%d values", len(xs))
		}
		c.add(Difference{Field: field, Old: count(a), New: count(b)})
		return
	}
	first, n := -1, 0
	for i := range a {
		if !c.number(field, i, a[i], b[i]) {
			if first < 0 {
				first = i
			}
			n++
		}
	}
	if first < 0 {
		return
	}
	d := Difference{Field: indexed(field, first), Old: numText(a[first]), New: numText(b[first]),
		Rel: relDiff(a[first], b[first]), Numeric: true}
	if n > 1 {
		d.Note = fmt.Sprintf("%d of %d values differ; the first is shown", n, len(a))
	}
	c.add(d)
}

// numText writes a number as the record does.
func numText(x float64) string {
	b, err := json.Marshal(x)
	if err != nil {
		return strconv.FormatFloat(x, 'g', -1, 64)
	}
	return string(b)
}

func nums(xs []*node) []float64 {
	out := make([]float64, len(xs))
	for i, x := range xs {
		out[i] = x.num
	}
	return out
}

func allNumbers(xs []*node) bool {
	for _, x := range xs {
		if x.kind != kindNumber {
			return false
		}
	}
	return len(xs) > 0
}

// label names each element of a list of objects by its "name", "key" or
// "step" member, or returns nil when the elements cannot be named uniquely.
func label(xs []*node) []string {
	for _, member := range []string{"name", "key", "step"} {
		names := make([]string, 0, len(xs))
		seen := map[string]bool{}
		for _, x := range xs {
			if x.kind != kindObject {
				return nil
			}
			i := x.key(member)
			if i < 0 || x.vals[i].kind != kindString || seen[x.vals[i].text] {
				break
			}
			seen[x.vals[i].text] = true
			names = append(names, x.vals[i].text)
		}
		if len(names) == len(xs) {
			return names
		}
	}
	return nil
}

// node is a JSON value that keeps the order of object members, so that
// differences are listed in record order.
type node struct {
	kind kind
	text string // a number's text, a string, "true" or "false"
	num  float64
	keys []string // object members, in order
	vals []*node  // object values, or array elements
}

type kind int

const (
	kindNull kind = iota
	kindBool
	kindNumber
	kindString
	kindArray
	kindObject
)

func (n *node) key(k string) int {
	for i, x := range n.keys {
		if x == k {
			return i
		}
	}
	return -1
}

// String renders a value for a table: strings without quotes, numbers as
// written, lists and objects as compact JSON.
func (n *node) String() string {
	switch n.kind {
	case kindNull:
		return "null"
	case kindString, kindBool, kindNumber:
		return n.text
	}
	var b strings.Builder
	n.json(&b)
	return b.String()
}

func (n *node) json(b *strings.Builder) {
	switch n.kind {
	case kindString:
		q, _ := json.Marshal(n.text)
		b.Write(q)
	case kindArray:
		b.WriteByte('[')
		for i, v := range n.vals {
			if i > 0 {
				b.WriteByte(',')
			}
			v.json(b)
		}
		b.WriteByte(']')
	case kindObject:
		b.WriteByte('{')
		for i, k := range n.keys {
			if i > 0 {
				b.WriteByte(',')
			}
			q, _ := json.Marshal(k)
			b.Write(q)
			b.WriteByte(':')
			n.vals[i].json(b)
		}
		b.WriteByte('}')
	default:
		b.WriteString(n.String())
	}
}

// parseTree reads one JSON document into an ordered tree.
func parseTree(data []byte) (*node, error) {
	dec := json.NewDecoder(bytes.NewReader(data))
	dec.UseNumber()
	n, err := parseValue(dec)
	if err != nil {
		return nil, err
	}
	if _, err := dec.Token(); err != io.EOF {
		return nil, errors.New("text after the JSON document")
	}
	return n, nil
}

func parseValue(dec *json.Decoder) (*node, error) {
	tok, err := dec.Token()
	if err != nil {
		return nil, err
	}
	switch t := tok.(type) {
	case nil:
		return &node{kind: kindNull}, nil
	case bool:
		return &node{kind: kindBool, text: strconv.FormatBool(t)}, nil
	case json.Number:
		x, err := strconv.ParseFloat(string(t), 64)
		if err != nil {
			return nil, fmt.Errorf("number %s: %w", t, err)
		}
		return &node{kind: kindNumber, text: string(t), num: x}, nil
	case string:
		return &node{kind: kindString, text: t}, nil
	case json.Delim:
		n := &node{kind: kindArray}
		if t == '{' {
			n.kind = kindObject
		}
		for dec.More() {
			if n.kind == kindObject {
				k, err := dec.Token()
				if err != nil {
					return nil, err
				}
				if n.key(k.(string)) >= 0 {
					return nil, fmt.Errorf("member %q appears twice in an object", k)
				}
				n.keys = append(n.keys, k.(string))
			}
			v, err := parseValue(dec)
			if err != nil {
				return nil, err
			}
			n.vals = append(n.vals, v)
		}
		if _, err := dec.Token(); err != nil {
			return nil, err
		}
		return n, nil
	}
	return nil, fmt.Errorf("unexpected JSON token %v", tok)
}

package replay

import (
	"fmt"
	"slices"
	"strconv"
	"strings"

	"github.com/hashicorp/hcl/v2"
	"github.com/hashicorp/hcl/v2/hclsyntax"

	"lotgate/pipeline/bundle"
)

// Change is one parameter that differs between two pipeline versions.
type Change struct {
	// Where is the block, nested blocks joined by " / ":
	// `limit "Largest unknown"`, `identify / component "benzene"`; "steps"
	// for the order of the steps and "files" for the files the pipeline
	// names.
	Where string
	// Name is the attribute ("(block)" for a block present on one side
	// only, the file's name under "files").
	Name string
	// Old and New are the values as written, with layout and comments
	// normalised; Absent where not written (the default then applies).
	Old, New string
}

// DiffPipelines lists the parameter differences between two pipeline
// versions, step by step and limit by limit, in the order of a's file (then
// what only b has): every attribute as written in each block (matched by
// block type, labels and occurrence), the order of the steps, and the
// digests of the files the pipelines name. Differences in comments and
// layout alone give no change.
func DiffPipelines(a, b *bundle.Bundle) ([]Change, error) {
	ea, sa, err := entries(a)
	if err != nil {
		return nil, err
	}
	eb, sb, err := entries(b)
	if err != nil {
		return nil, err
	}
	var out []Change
	if !slices.Equal(sa, sb) {
		out = append(out, Change{Where: "steps", Name: "order", Old: strings.Join(sa, " → "), New: strings.Join(sb, " → ")})
	}
	out = append(out, matchEntries(ea, eb)...)
	out = append(out, diffFiles(a, b)...)
	return out, nil
}

// entry is one attribute (or a block's presence) of a pipeline file.
type entry struct{ where, name, value string }

func matchEntries(a, b []entry) []Change {
	key := func(e entry) string { return e.where + "\x00" + e.name }
	inB := map[string]string{}
	for _, e := range b {
		inB[key(e)] = e.value
	}
	inA := map[string]bool{}
	var out []Change
	for _, e := range a {
		inA[key(e)] = true
		v, ok := inB[key(e)]
		switch {
		case !ok:
			out = append(out, Change{Where: e.where, Name: e.name, Old: e.value, New: Absent})
		case v != e.value:
			out = append(out, Change{Where: e.where, Name: e.name, Old: e.value, New: v})
		}
	}
	for _, e := range b {
		if !inA[key(e)] {
			out = append(out, Change{Where: e.where, Name: e.name, Old: Absent, New: e.value})
		}
	}
	return out
}

func diffFiles(a, b *bundle.Bundle) []Change {
	files := func(x *bundle.Bundle) []bundle.File { return x.Manifest.Files[1:] } // [0] is the pipeline
	digest := map[string]string{}
	for _, f := range files(b) {
		digest[f.Path] = f.SHA256
	}
	seen := map[string]bool{}
	var out []Change
	for _, f := range files(a) {
		seen[f.Path] = true
		switch d, ok := digest[f.Path]; {
		case !ok:
			out = append(out, Change{Where: "files", Name: f.Path, Old: "sha256 " + f.SHA256, New: Absent})
		case d != f.SHA256:
			out = append(out, Change{Where: "files", Name: f.Path, Old: "sha256 " + f.SHA256, New: "sha256 " + d})
		}
	}
	for _, f := range files(b) {
		if !seen[f.Path] {
			out = append(out, Change{Where: "files", Name: f.Path, Old: Absent, New: "sha256 " + f.SHA256})
		}
	}
	return out
}

// notSteps are the top-level blocks that are not steps.
var notSteps = []string{"pipeline", "input", "limit", "report"}

// entries flattens a bundle's pipeline file into its attributes, in file
// order, and lists its steps in run order.
func entries(b *bundle.Bundle) ([]entry, []string, error) {
	name := b.Manifest.Pipeline.File
	src, ok := b.File(name)
	if !ok {
		return nil, nil, fmt.Errorf("bundle has no %s", name)
	}
	f, diags := hclsyntax.ParseConfig(src, name, hcl.InitialPos)
	if diags.HasErrors() {
		return nil, nil, fmt.Errorf("%s: %s", name, diags.Error())
	}
	body := f.Body.(*hclsyntax.Body)
	var stepOrder []string
	for _, blk := range body.Blocks {
		if !slices.Contains(notSteps, blk.Type) {
			stepOrder = append(stepOrder, blk.Type)
		}
	}
	var out []entry
	flatten(body, src, "", &out)
	return out, stepOrder, nil
}

func flatten(body *hclsyntax.Body, src []byte, prefix string, out *[]entry) {
	attrs := make([]*hclsyntax.Attribute, 0, len(body.Attributes))
	for _, a := range body.Attributes {
		attrs = append(attrs, a)
	}
	slices.SortFunc(attrs, func(x, y *hclsyntax.Attribute) int { return x.SrcRange.Start.Byte - y.SrcRange.Start.Byte })
	for _, a := range attrs {
		*out = append(*out, entry{prefix, a.Name, exprText(src, a.Expr.Range())})
	}
	count := map[string]int{}
	for _, blk := range body.Blocks {
		where := blk.Type
		for _, l := range blk.Labels {
			where += " " + strconv.Quote(l)
		}
		count[where]++
		if n := count[where]; n > 1 {
			where += fmt.Sprintf(" #%d", n)
		}
		if prefix != "" {
			where = prefix + " / " + where
		}
		*out = append(*out, entry{where, "(block)", "present"})
		flatten(blk.Body, src, where, out)
	}
}

// exprText is an expression's source with comments dropped and every run of
// white space between two tokens made one space (one after a comma, none
// inside brackets or before a comma, and no trailing comma), so that layout alone is no change.
func exprText(src []byte, r hcl.Range) string {
	raw := r.SliceBytes(src)
	toks, diags := hclsyntax.LexExpression(raw, "", hcl.InitialPos)
	if diags.HasErrors() {
		return strings.Join(strings.Fields(string(raw)), " ")
	}
	var sig hclsyntax.Tokens
	for _, t := range toks {
		switch t.Type {
		case hclsyntax.TokenComment, hclsyntax.TokenNewline, hclsyntax.TokenEOF:
			continue
		}
		sig = append(sig, t)
	}
	closer := func(t hclsyntax.TokenType) bool {
		return t == hclsyntax.TokenCBrack || t == hclsyntax.TokenCParen || t == hclsyntax.TokenCBrace
	}
	opener := func(t hclsyntax.TokenType) bool {
		return t == hclsyntax.TokenOBrack || t == hclsyntax.TokenOParen || t == hclsyntax.TokenOBrace
	}
	var b strings.Builder
	for i, t := range sig {
		if t.Type == hclsyntax.TokenComma && i+1 < len(sig) && closer(sig[i+1].Type) {
			continue
		}
		gap := i > 0 && (t.Range.Start.Byte > sig[i-1].Range.End.Byte || sig[i-1].Type == hclsyntax.TokenComma)
		if gap && !opener(sig[i-1].Type) && !closer(t.Type) && t.Type != hclsyntax.TokenComma {
			b.WriteByte(' ')
		}
		b.Write(t.Bytes)
	}
	return b.String()
}

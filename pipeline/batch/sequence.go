// Package batch processes a whole analytical sequence — blanks, calibration
// standards, suitability injections, check standards and sample replicates
// described in a sequence file — through one pipeline: every injection is
// processed on a pool of workers, the calibration curves are fitted, the
// system-suitability gates are evaluated over the sequence, calibrated
// amounts are read, replicates are combined, and each lot gets a verdict
// (released, rejected, invalid run or undetermined) in a deterministic lot
// record (lotgate.lot/v1).
package batch

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strings"

	"github.com/hashicorp/hcl/v2"
	"github.com/hashicorp/hcl/v2/hclsyntax"
	"github.com/zclconf/go-cty/cty"
	"github.com/zclconf/go-cty/cty/convert"

	"lotgate/pipeline"
	"lotgate/steps"
)

// Injection roles.
const (
	RoleBlank       = "blank"
	RoleCalibration = "calibration"
	RoleSuitability = "suitability"
	RoleCheck       = "check"
	RoleSample      = "sample"
)

var roles = []string{RoleBlank, RoleCalibration, RoleSuitability, RoleCheck, RoleSample}

// Sequence is a parsed sequence file: the standards it uses and its
// injections in run order.
type Sequence struct {
	Name        string
	Description string
	// Lot is the lot of sample injections that do not name their own.
	Lot string
	// Unit, when given, must equal the pipeline's calibration unit.
	Unit string
	// File is the sequence file's base name and Digest the SHA-256 of its
	// bytes, hex encoded.
	File, Digest string
	Standards    []*Standard
	Injections   []*Injection

	dir    string
	file   *hcl.File
	name   string // as given to Parse, for diagnostics
	units  hcl.Range
	header hcl.Range
}

// Standard is a standard solution: its level and the amounts of the
// components it holds, in the calibration's unit.
type Standard struct {
	Name  string
	Level int
	// Amounts are sorted by component name.
	Amounts []StandardAmount
	Range   hcl.Range
	amounts hcl.Range
}

// StandardAmount is one component's amount in a standard.
type StandardAmount struct {
	Component string
	Amount    float64
}

// Amount returns the standard's amount of a component and whether it holds one.
func (s *Standard) Amount(component string) (float64, bool) {
	for _, a := range s.Amounts {
		if a.Component == component {
			return a.Amount, true
		}
	}
	return 0, false
}

// Injection is one injection of the sequence.
type Injection struct {
	// Number is the 1-based position in the sequence; ID the label written.
	Number int
	ID     string
	// File is the data file as written; Path where it is read from.
	File, Path string
	Role       string
	// Standard is set for calibration and check injections (and may be for
	// suitability injections).
	Standard *Standard
	// Lot, Sample and Replicate identify a sample injection's result.
	Lot, Sample string
	Replicate   int
	// Dilution multiplies the amounts read from the calibration (1 when
	// not given).
	Dilution float64
	Range    hcl.Range
}

// Load reads and parses the sequence file at path; data files are found
// relative to its folder.
func Load(path string) (*Sequence, error) {
	src, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("sequence %s: %w", path, err)
	}
	return Parse(src, path)
}

// Parse parses a sequence held in memory. filename names it in diagnostics
// and data files are found relative to its folder. Mistakes in the file
// itself are reported here; Check compares it with a pipeline.
func Parse(src []byte, filename string) (*Sequence, error) {
	f, diags := hclsyntax.ParseConfig(src, filename, hcl.InitialPos)
	files := map[string]*hcl.File{filename: f}
	if diags.HasErrors() {
		return nil, pipeline.NewError(diags, files)
	}
	sum := sha256.Sum256(src)
	s := &Sequence{File: filepath.Base(filename), Digest: hex.EncodeToString(sum[:]),
		dir: filepath.Dir(filename), file: f, name: filename}
	diags = append(diags, s.decode(f.Body)...)
	if diags.HasErrors() {
		return nil, pipeline.NewError(diags, files)
	}
	return s, nil
}

var sequenceTop = &hcl.BodySchema{Blocks: []hcl.BlockHeaderSchema{
	{Type: "sequence", LabelNames: []string{"name"}},
	{Type: "standard", LabelNames: []string{"name"}},
	{Type: "injection", LabelNames: []string{"id"}},
}}

var headerSchema = &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
	{Name: "lot"}, {Name: "description"}, {Name: "unit"},
}}

var standardSchema = &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
	{Name: "level"}, {Name: "amounts", Required: true},
}}

var injectionSchema = &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
	{Name: "file", Required: true}, {Name: "role", Required: true}, {Name: "standard"},
	{Name: "sample"}, {Name: "lot"}, {Name: "replicate"}, {Name: "dilution"},
}}

// body decodes the attributes of one block with diagnostics on the
// offending attribute.
type body struct {
	block   *hcl.Block
	content *hcl.BodyContent
	diags   hcl.Diagnostics
}

func newBody(b *hcl.Block, schema *hcl.BodySchema) *body {
	c, d := b.Body.Content(schema)
	return &body{block: b, content: c, diags: d}
}

func (b *body) errorAt(rng hcl.Range, summary, detail string) {
	b.diags = append(b.diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: summary, Detail: detail, Subject: rng.Ptr()})
}

// fail reports a problem on the named attribute, or on the block when the
// attribute is absent.
func (b *body) fail(name, detail string) {
	if attr, ok := b.content.Attributes[name]; ok {
		b.errorAt(attr.Expr.Range(), "Invalid value for "+name, detail)
		return
	}
	b.errorAt(b.block.DefRange, "Invalid "+b.block.Type+" block", detail)
}

func (b *body) value(name string, ty cty.Type) (cty.Value, bool) {
	attr, ok := b.content.Attributes[name]
	if !ok {
		return cty.NilVal, false
	}
	v, d := attr.Expr.Value(nil)
	b.diags = append(b.diags, d...)
	if d.HasErrors() {
		return cty.NilVal, false
	}
	cv, err := convert.Convert(v, ty)
	if err != nil || cv.IsNull() {
		why := "must not be null"
		if err != nil {
			why = err.Error()
		}
		b.fail(name, fmt.Sprintf("%s must be %s: %s", name, ty.FriendlyName(), why))
		return cty.NilVal, false
	}
	return cv, true
}

func (b *body) str(name string) string {
	v, ok := b.value(name, cty.String)
	if !ok {
		return ""
	}
	return v.AsString()
}

func (b *body) number(name string, def float64) (float64, bool) {
	v, ok := b.value(name, cty.Number)
	if !ok {
		return def, false
	}
	x, _ := v.AsBigFloat().Float64()
	if math.IsInf(x, 0) {
		b.fail(name, name+" is out of range")
		return def, false
	}
	return x, true
}

func (b *body) integer(name string, lo, hi int) (int, bool) {
	x, ok := b.number(name, 0)
	if !ok {
		return 0, false
	}
	if x != math.Trunc(x) || x < float64(lo) || x > float64(hi) {
		b.fail(name, fmt.Sprintf("%s must be a whole number from %d to %d, not %g", name, lo, hi, x))
		return 0, false
	}
	return int(x), true
}

func (s *Sequence) decode(root hcl.Body) hcl.Diagnostics {
	content, diags := root.Content(sequenceTop)
	var header *hcl.Block
	standards := map[string]*Standard{}
	var pending []*hcl.Block
	for _, blk := range content.Blocks {
		switch blk.Type {
		case "sequence":
			if header != nil {
				diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Duplicate sequence block",
					Detail:  fmt.Sprintf("a sequence file has one sequence block; the first is at line %d", header.DefRange.Start.Line),
					Subject: blk.DefRange.Ptr()})
				continue
			}
			header = blk
			s.header = blk.DefRange
			b := newBody(blk, headerSchema)
			s.Name = blk.Labels[0]
			s.Lot = strings.TrimSpace(b.str("lot"))
			s.Description = b.str("description")
			s.Unit = b.str("unit")
			if a, ok := b.content.Attributes["unit"]; ok {
				s.units = a.Expr.Range()
			}
			diags = append(diags, b.diags...)
		case "standard":
			st, d := decodeStandard(blk)
			diags = append(diags, d...)
			if prev, dup := standards[st.Name]; dup {
				diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Duplicate standard",
					Detail:  fmt.Sprintf("standard %q is already declared at line %d", st.Name, prev.Range.Start.Line),
					Subject: blk.DefRange.Ptr()})
				continue
			}
			standards[st.Name] = st
			s.Standards = append(s.Standards, st)
		default:
			pending = append(pending, blk) // injections may name standards declared after them
		}
	}
	if header == nil {
		diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Missing sequence block",
			Detail:  `a sequence file starts with sequence "NAME" { lot = "LOT" } naming the sequence and its lot`,
			Subject: root.MissingItemRange().Ptr()})
	}
	ids := map[string]*Injection{}
	stems := map[string]*Injection{}
	for _, blk := range pending {
		inj, d := s.decodeInjection(blk, standards)
		diags = append(diags, d...)
		if inj == nil {
			continue
		}
		inj.Number = len(s.Injections) + 1
		if prev, dup := ids[inj.ID]; dup {
			diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Duplicate injection",
				Detail:  fmt.Sprintf("injection %q is already declared at line %d", inj.ID, prev.Range.Start.Line),
				Subject: blk.DefRange.Ptr()})
		}
		ids[inj.ID] = inj
		stem := stemOf(inj.File)
		if prev, dup := stems[stem]; dup && inj.File != "" {
			diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Duplicate data file name",
				Detail: fmt.Sprintf("%s and %s (line %d) would both be written as %s.json; each injection needs its own data file name",
					inj.File, prev.File, prev.Range.Start.Line, stem),
				Subject: blk.DefRange.Ptr()})
		}
		stems[stem] = inj
		s.Injections = append(s.Injections, inj)
	}
	if len(pending) == 0 {
		diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "No injections",
			Detail:  `a sequence lists its injections in run order: injection "ID" { file = "…" role = "…" }`,
			Subject: root.MissingItemRange().Ptr()})
	}
	diags = append(diags, s.numberReplicates()...)
	return diags
}

func decodeStandard(blk *hcl.Block) (*Standard, hcl.Diagnostics) {
	b := newBody(blk, standardSchema)
	st := &Standard{Name: blk.Labels[0], Range: blk.DefRange}
	if lv, ok := b.integer("level", 0, 1000); ok {
		st.Level = lv
	}
	if attr, ok := b.content.Attributes["amounts"]; ok {
		st.amounts = attr.Expr.Range()
		if v, ok := b.value("amounts", cty.Map(cty.Number)); ok {
			for name, x := range v.AsValueMap() { // sorted below
				if x.IsNull() {
					b.fail("amounts", fmt.Sprintf("the amount of %q is null", name))
					continue
				}
				f, _ := x.AsBigFloat().Float64()
				if f < 0 || math.IsInf(f, 0) {
					b.fail("amounts", fmt.Sprintf("the amount of %q must be a finite number not below 0, not %g", name, f))
					continue
				}
				st.Amounts = append(st.Amounts, StandardAmount{Component: name, Amount: f})
			}
			slices.SortFunc(st.Amounts, func(x, y StandardAmount) int { return strings.Compare(x.Component, y.Component) })
			if len(st.Amounts) == 0 {
				b.fail("amounts", `amounts names at least one component, e.g. { benzene = 20, ethylbenzene = 100 }`)
			}
		}
	}
	return st, b.diags
}

func (s *Sequence) decodeInjection(blk *hcl.Block, standards map[string]*Standard) (*Injection, hcl.Diagnostics) {
	b := newBody(blk, injectionSchema)
	inj := &Injection{ID: blk.Labels[0], Range: blk.DefRange, Dilution: 1}
	inj.File = b.str("file")
	if _, ok := b.content.Attributes["file"]; ok && strings.TrimSpace(inj.File) == "" {
		b.fail("file", "file names the injection's data file, relative to the sequence file")
	}
	inj.Path = inj.File
	if inj.File != "" && !filepath.IsAbs(inj.File) {
		inj.Path = filepath.Join(s.dir, inj.File)
	}
	inj.Role = b.str("role")
	if _, ok := b.content.Attributes["role"]; ok && !slices.Contains(roles, inj.Role) {
		msg := fmt.Sprintf("role %q is not known; use one of %s", inj.Role, quoteList(roles))
		if near := nearest(inj.Role, roles); near != "" {
			msg = fmt.Sprintf("role %q is not known; did you mean %q? (one of %s)", inj.Role, near, quoteList(roles))
		}
		b.fail("role", msg)
	}
	if name := b.str("standard"); name != "" {
		inj.Standard = standards[name]
		if inj.Standard == nil {
			var known []string
			for _, st := range s.Standards {
				known = append(known, st.Name)
			}
			msg := fmt.Sprintf("no standard %q is declared", name)
			if near := nearest(name, known); near != "" {
				msg += fmt.Sprintf("; did you mean %q?", near)
			}
			b.fail("standard", msg)
		}
	}
	inj.Sample = strings.TrimSpace(b.str("sample"))
	inj.Lot = strings.TrimSpace(b.str("lot"))
	if r, ok := b.integer("replicate", 1, 1000); ok {
		inj.Replicate = r
	}
	if d, ok := b.number("dilution", 1); ok {
		if !(d > 0) {
			b.fail("dilution", fmt.Sprintf("dilution must be greater than 0, not %g", d))
		}
		inj.Dilution = d
	}
	sampleOnly := []string{"sample", "lot", "replicate", "dilution"}
	switch inj.Role {
	case RoleSample:
		if inj.Sample == "" {
			b.fail("sample", `a sample injection names its sample: sample = "SAMPLE ID"`)
		}
		if inj.Lot == "" {
			inj.Lot = s.Lot
		}
		if inj.Lot == "" {
			b.fail("lot", `a sample injection needs a lot: give lot here or in the sequence block`)
		}
		if _, ok := b.content.Attributes["standard"]; ok {
			b.fail("standard", "a sample injection has no standard")
		}
	case RoleCalibration, RoleCheck:
		if _, ok := b.content.Attributes["standard"]; !ok {
			b.fail("", fmt.Sprintf(`a %s injection names its standard: standard = "NAME"`, inj.Role))
		}
		fallthrough
	case RoleBlank, RoleSuitability:
		if inj.Role == RoleBlank {
			if _, ok := b.content.Attributes["standard"]; ok {
				b.fail("standard", "a blank injection has no standard")
			}
		}
		for _, name := range sampleOnly {
			if _, ok := b.content.Attributes[name]; ok {
				b.fail(name, fmt.Sprintf("%s applies to sample injections only", name))
			}
		}
	}
	return inj, b.diags
}

// numberReplicates gives replicate numbers, in run order, to the sample
// injections that have none, and reports a number used twice for a sample.
func (s *Sequence) numberReplicates() hcl.Diagnostics {
	var diags hcl.Diagnostics
	used := map[[2]string]map[int]*Injection{}
	for _, inj := range s.Injections {
		if inj.Role != RoleSample || inj.Replicate == 0 {
			continue
		}
		k := [2]string{inj.Lot, inj.Sample}
		if used[k] == nil {
			used[k] = map[int]*Injection{}
		}
		if prev, dup := used[k][inj.Replicate]; dup {
			diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Duplicate replicate",
				Detail: fmt.Sprintf("replicate %d of sample %q is already injection %q (line %d)",
					inj.Replicate, inj.Sample, prev.ID, prev.Range.Start.Line),
				Subject: inj.Range.Ptr()})
		}
		used[k][inj.Replicate] = inj
	}
	for _, inj := range s.Injections {
		if inj.Role != RoleSample || inj.Replicate != 0 {
			continue
		}
		k := [2]string{inj.Lot, inj.Sample}
		if used[k] == nil {
			used[k] = map[int]*Injection{}
		}
		n := 1
		for used[k][n] != nil {
			n++
		}
		inj.Replicate = n
		used[k][n] = inj
	}
	return diags
}

// Check compares the sequence with the pipeline that will process it, and
// reports with diagnostics in the sequence file what cannot work: amounts
// of components the pipeline does not declare, a unit that differs from
// the calibration's, calibration injections without a calibration block,
// or a calibrated component that no calibration standard holds.
func (s *Sequence) Check(p *pipeline.Pipeline) error {
	var diags hcl.Diagnostics
	errAt := func(rng hcl.Range, summary, detail string) {
		diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: summary, Detail: detail, Subject: rng.Ptr()})
	}
	declared := componentsOf(p)
	for _, st := range s.Standards {
		for _, a := range st.Amounts {
			if !slices.Contains(declared, a.Component) {
				msg := fmt.Sprintf("%q is not a component of pipeline %q", a.Component, p.Name)
				if near := nearest(a.Component, declared); near != "" {
					msg += fmt.Sprintf("; did you mean %q?", near)
				}
				errAt(st.amounts, "Unknown component", msg)
			}
		}
	}
	cal := p.Calibration
	var hasCal bool
	for _, inj := range s.Injections {
		hasCal = hasCal || inj.Role == RoleCalibration
	}
	switch {
	case cal == nil && hasCal:
		for _, inj := range s.Injections {
			if inj.Role == RoleCalibration || inj.Role == RoleCheck {
				errAt(inj.Range, "No calibration in the pipeline",
					fmt.Sprintf("pipeline %q has no calibration block, so its %s injections would not be used", p.Name, inj.Role))
				break
			}
		}
	case cal != nil:
		if s.Unit != "" && s.Unit != cal.Unit {
			errAt(s.units, "Unit differs from the calibration's",
				fmt.Sprintf("the sequence gives amounts in %q but pipeline %q calibrates in %q", s.Unit, p.Name, cal.Unit))
		}
		for _, c := range cal.Components {
			found := false
			for _, inj := range s.Injections {
				if inj.Role == RoleCalibration && inj.Standard != nil {
					if _, ok := inj.Standard.Amount(c.Name); ok {
						found = true
						break
					}
				}
			}
			if !found {
				errAt(s.header, "Component without calibration standards",
					fmt.Sprintf("pipeline %q calibrates %q but no calibration injection's standard gives an amount of it", p.Name, c.Name))
			}
		}
	}
	if diags.HasErrors() {
		return pipeline.NewError(diags, map[string]*hcl.File{s.name: s.file})
	}
	return nil
}

// componentsOf lists the components the pipeline's identify step declares.
func componentsOf(p *pipeline.Pipeline) []string {
	var out []string
	for _, st := range p.Steps {
		if id, ok := st.(*steps.Identify); ok {
			for _, c := range id.Components {
				out = append(out, c.Name)
			}
		}
	}
	return out
}

// stemOf is the base name of a data file without its extension: the name its
// record is written under.
func stemOf(file string) string {
	base := filepath.Base(file)
	return strings.TrimSuffix(base, filepath.Ext(base))
}

func quoteList(xs []string) string {
	q := make([]string, len(xs))
	for i, x := range xs {
		q[i] = fmt.Sprintf("%q", x)
	}
	return strings.Join(q, ", ")
}

// nearest returns the candidate s is most likely a typo of, or "".
func nearest(s string, candidates []string) string { return pipeline.Suggest(s, candidates) }

// Package pipeline reads a lotgate pipeline (HCL), checks it with
// diagnostics that name file, line and column, and runs it over data files to
// produce the versioned JSON record.
package pipeline

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io/fs"
	"os"
	"path"
	"path/filepath"
	"slices"
	"strings"

	"github.com/hashicorp/hcl/v2"
	"github.com/hashicorp/hcl/v2/hclsyntax"

	"lotgate/pipeline/input"
	"lotgate/steps"
)

// Version is the lotgate version written into every record.
const Version = "0.1.0"

// Pipeline is a loaded, checked pipeline: load once, run many.
type Pipeline struct {
	Name        string
	Revision    int
	Description string
	// File is the pipeline's file name (base name) and Digest the SHA-256 of
	// its bytes, hex encoded.
	File   string
	Digest string

	Input  input.Options
	Steps  []steps.Step
	Limits []*LimitDef
	Report ReportSettings
	// Calibration, Suitability and Replicates are the sequence-level
	// blocks (nil when absent): they apply when a whole sequence is
	// processed (package pipeline/batch), not to a single file.
	Calibration *Calibration
	Suitability *Suitability
	Replicates  *Replicates
	// Logo holds the bytes of the report's logo image, if any.
	Logo []byte
	// Refs lists the files the pipeline names (as written, relative to its
	// folder), in the order they appear: what a frozen bundle must carry.
	Refs []string
	// Bundle is the SHA-256 of the frozen bundle the pipeline came from, or "".
	Bundle string

	readRef func(string) ([]byte, error)

	// stepSettings parallels Steps: each step's settings as used.
	stepSettings  [][]Setting
	inputSettings []Setting
}

// Error is an HCL file (a pipeline, a sequence) that could not be loaded:
// the diagnostics and the source they point into.
type Error struct {
	Diags hcl.Diagnostics
	files map[string]*hcl.File
}

// Error formats every diagnostic as "file:line,col: summary; detail".
func (e *Error) Error() string {
	var lines []string
	for _, d := range e.Diags {
		if d.Severity != hcl.DiagError {
			continue
		}
		where := ""
		if d.Subject != nil {
			where = fmt.Sprintf("%s:%d,%d: ", d.Subject.Filename, d.Subject.Start.Line, d.Subject.Start.Column)
		}
		msg := where + d.Summary
		if d.Detail != "" {
			msg += "; " + d.Detail
		}
		lines = append(lines, msg)
	}
	return strings.Join(lines, "\n")
}

// NewError wraps diagnostics about the given parsed files.
func NewError(diags hcl.Diagnostics, files map[string]*hcl.File) *Error {
	return &Error{Diags: diags, files: files}
}

// Pretty writes the diagnostics with source snippets, as `lotgate check` shows them.
func (e *Error) Pretty() string {
	var b bytes.Buffer
	w := hcl.NewDiagnosticTextWriter(&b, e.files, 100, false)
	_ = w.WriteDiagnostics(e.Diags)
	return b.String()
}

// Load reads and checks the pipeline file at path. Files it names (a logo)
// are read relative to its folder.
func Load(path string) (*Pipeline, error) {
	src, err := os.ReadFile(path)
	if err != nil {
		return nil, fmt.Errorf("pipeline %s: %w", path, err)
	}
	return Parse(src, path)
}

// Parse checks a pipeline held in memory; filename is used in diagnostics,
// and files the pipeline names are read from the disk relative to its folder.
func Parse(src []byte, filename string) (*Pipeline, error) {
	dir := filepath.Dir(filename)
	return parse(src, filename, func(ref string) ([]byte, error) {
		if !filepath.IsAbs(ref) {
			ref = filepath.Join(dir, ref)
		}
		return os.ReadFile(ref)
	})
}

// LoadFS reads and checks the pipeline at name inside fsys; files it names
// are read from fsys too, relative to the pipeline's folder there, and a
// name that would leave fsys (absolute, or climbing out with "..") is
// refused. A frozen bundle loads this way, so it never reads outside itself.
func LoadFS(fsys fs.FS, name string) (*Pipeline, error) {
	src, err := fs.ReadFile(fsys, name)
	if err != nil {
		return nil, fmt.Errorf("pipeline %s: %w", name, err)
	}
	dir := path.Dir(name)
	return parse(src, name, func(ref string) ([]byte, error) {
		full := path.Join(dir, filepath.ToSlash(ref))
		if filepath.IsAbs(ref) || !fs.ValidPath(full) {
			return nil, fmt.Errorf("%q is outside the bundle; a frozen pipeline reads only its own files", ref)
		}
		return fs.ReadFile(fsys, full)
	})
}

func parse(src []byte, filename string, readRef func(string) ([]byte, error)) (*Pipeline, error) {
	f, diags := hclsyntax.ParseConfig(src, filename, hcl.InitialPos)
	files := map[string]*hcl.File{filename: f}
	if diags.HasErrors() {
		return nil, &Error{Diags: diags, files: files}
	}
	sum := sha256.Sum256(src)
	p := &Pipeline{File: filepath.Base(filename), Digest: hex.EncodeToString(sum[:]), readRef: readRef}
	diags = append(diags, p.decode(f.Body, src)...)
	if diags.HasErrors() {
		return nil, &Error{Diags: diags, files: files}
	}
	return p, nil
}

func topSchema() *hcl.BodySchema {
	s := &hcl.BodySchema{Blocks: []hcl.BlockHeaderSchema{
		{Type: "pipeline", LabelNames: []string{"name"}},
		{Type: "input"},
		{Type: "limit", LabelNames: []string{"name"}},
		{Type: "report"},
		{Type: "calibration"},
		{Type: "suitability"},
		{Type: "replicates"},
	}}
	for _, t := range stepTypes() {
		s.Blocks = append(s.Blocks, hcl.BlockHeaderSchema{Type: t})
	}
	return s
}

var headerSchema = &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
	{Name: "revision", Required: true}, {Name: "description"},
}}

var inputSchema = &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
	{Name: "time_column"}, {Name: "signal_column"}, {Name: "time_unit"}, {Name: "signal_unit"},
	{Name: "max_mb"}, {Name: "spacing_tolerance"}, {Name: "min_points"},
}}

func (p *Pipeline) decode(body hcl.Body, src []byte) hcl.Diagnostics {
	p.Report = defaultReport()
	content, diags := body.Content(topSchema())
	var header *hcl.Block
	once := map[string]*hcl.Block{}
	done := map[string]bool{}
	for _, b := range content.Blocks {
		switch b.Type {
		case "pipeline", "input", "report", "calibration", "suitability", "replicates":
			if prev := once[b.Type]; prev != nil {
				diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Duplicate " + b.Type + " block",
					Detail:  fmt.Sprintf("a pipeline has one %s block; the first is at line %d", b.Type, prev.DefRange.Start.Line),
					Subject: b.DefRange.Ptr()})
				continue
			}
			once[b.Type] = b
			switch b.Type {
			case "pipeline":
				header = b
				diags = append(diags, p.decodeHeader(b)...)
			case "input":
				diags = append(diags, p.decodeInput(b)...)
			case "calibration":
				diags = append(diags, p.decodeCalibration(b)...)
			case "suitability":
				diags = append(diags, p.decodeSuitability(b)...)
			case "replicates":
				diags = append(diags, p.decodeReplicates(b)...)
			default:
				diags = append(diags, p.decodeReport(b)...)
			}
		case "limit":
			l, d := decodeLimit(b, src)
			diags = append(diags, d...)
			if l != nil {
				for _, o := range p.Limits {
					if o.Name == l.Name {
						diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Duplicate limit",
							Detail: fmt.Sprintf("a limit named %q is already declared", l.Name), Subject: b.DefRange.Ptr()})
					}
				}
				p.Limits = append(p.Limits, l)
			}
		default:
			kind := registry[b.Type]
			for _, need := range kind.needs {
				if !done[need] {
					diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Step out of order",
						Detail:  fmt.Sprintf("the %s step needs a %s step before it (steps run in the order written)", b.Type, need),
						Subject: b.DefRange.Ptr()})
				}
			}
			if b.Type == "quantify" && !done["identify"] && slices.ContainsFunc(content.Blocks, func(o *hcl.Block) bool { return o.Type == "identify" }) {
				diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Step out of order",
					Detail:  "quantify must come after identify, so that response factors reach the named peaks",
					Subject: b.DefRange.Ptr()})
			}
			a := newAttrs(b, kind.schema)
			st := kind.decode(a)
			diags = append(diags, a.diags...)
			p.Steps = append(p.Steps, st)
			p.stepSettings = append(p.stepSettings, a.settings)
			done[b.Type] = true
		}
	}
	if header == nil {
		diags = append(diags, &hcl.Diagnostic{Severity: hcl.DiagError, Summary: "Missing pipeline block",
			Detail:  `every pipeline starts with pipeline "NAME" { revision = N } so that records can name the method version`,
			Subject: body.MissingItemRange().Ptr()})
	}
	if once["input"] == nil {
		// Defaults for everything, recorded like an explicit block.
		diags = append(diags, p.decodeInput(&hcl.Block{Type: "input", Body: hcl.EmptyBody()})...)
	}
	return diags
}

func (p *Pipeline) decodeHeader(b *hcl.Block) hcl.Diagnostics {
	a := newAttrs(b, headerSchema)
	p.Name = b.Labels[0]
	p.Revision = a.integer("revision", 0, func(n int) string {
		if n < 0 {
			return "revision must not be negative"
		}
		return ""
	})
	p.Description = a.str("description", "")
	return a.diags
}

func (p *Pipeline) decodeInput(b *hcl.Block) hcl.Diagnostics {
	a := newAttrs(b, inputSchema)
	p.Input = input.Options{
		TimeColumn:       a.str("time_column", ""),
		SignalColumn:     a.str("signal_column", ""),
		TimeUnit:         a.str("time_unit", "min", "min", "s", "ms", "h"),
		SignalUnit:       a.str("signal_unit", ""),
		MaxBytes:         int64(a.num("max_mb", 256, positive("max_mb")) * (1 << 20)),
		SpacingTolerance: a.num("spacing_tolerance", 0.01, positive("spacing_tolerance")),
		MinPoints:        a.integer("min_points", 16, intRange("min_points", 3, 1<<30)),
	}
	p.inputSettings = a.settings
	return a.diags
}

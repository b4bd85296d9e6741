package pipeline

import (
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"path/filepath"
	"slices"

	"github.com/hashicorp/hcl/v2"
	"github.com/zclconf/go-cty/cty"
)

// Formats a pipeline can ask for.
var reportFormats = []string{"json", "xlsx", "pdf"}

// DefaultCautions are printed on every certificate; a site note can add to
// them, never remove them.
var DefaultCautions = []string{
	"Hydrogen used as carrier gas is flammable in air over a wide range (about 4–75 % by volume); the samples are flammable solvents.",
	"This document reports analytical results only. Handling, storage and instrument work follow the site's safety rules, the safety data sheets and local codes, which take precedence.",
}

// ReportSettings say which documents to write for each record and what the
// certificate shows besides the results. They are copied into the record,
// so that a document can be rendered from the record alone.
type ReportSettings struct {
	Formats    []string `json:"formats"`
	Site       string   `json:"site"`
	Address    []string `json:"address"`
	Product    string   `json:"product"`
	Grade      string   `json:"grade"`
	Paper      string   `json:"paper"`
	Signatures []string `json:"signatures"`
	Cautions   []string `json:"cautions"`
	// LogoFile is the logo's file name and LogoSHA256 the digest of its
	// bytes ("" when there is none).
	LogoFile   string `json:"logo_file,omitempty"`
	LogoSHA256 string `json:"logo_sha256,omitempty"`
}

var reportSchema = &hcl.BodySchema{Attributes: []hcl.AttributeSchema{
	{Name: "formats"}, {Name: "site"}, {Name: "address"}, {Name: "product"}, {Name: "grade"},
	{Name: "paper"}, {Name: "signatures"}, {Name: "safety_note"}, {Name: "logo"},
}}

// defaultReport is used when a pipeline has no report block: the JSON record only.
func defaultReport() ReportSettings {
	return ReportSettings{Formats: []string{"json"}, Paper: "A4",
		Signatures: []string{"Prepared by", "Reviewed by", "Approved by"}, Cautions: DefaultCautions}
}

// strings reads a list of strings.
func (a *attrs) strings(name string, def []string) []string {
	v, attr, ok := a.value(name, cty.List(cty.String))
	out := def
	if ok {
		out = nil
		for _, e := range v.AsValueSlice() {
			if e.IsNull() {
				a.errorAt(attr, name+" must not contain null")
				continue
			}
			out = append(out, e.AsString())
		}
	}
	a.record(name, out)
	return out
}

func (p *Pipeline) decodeReport(b *hcl.Block) hcl.Diagnostics {
	a := newAttrs(b, reportSchema)
	r := defaultReport()
	r.Formats = a.strings("formats", r.Formats)
	for _, f := range r.Formats {
		if !slices.Contains(reportFormats, f) {
			a.fail("formats", fmt.Sprintf("format %q is not known; use any of %s", f, quoteList(reportFormats)))
		}
	}
	if !slices.Contains(r.Formats, "json") {
		a.fail("formats", `formats must include "json": the record is what every other document renders`)
	}
	r.Site = a.str("site", "")
	r.Address = a.strings("address", nil)
	r.Product = a.str("product", "")
	r.Grade = a.str("grade", "")
	r.Paper = a.str("paper", "A4", "A4", "Letter")
	r.Signatures = a.strings("signatures", r.Signatures)
	if len(r.Signatures) > 6 {
		a.fail("signatures", "at most 6 signature lines fit on a certificate")
	}
	if note := a.str("safety_note", ""); note != "" {
		r.Cautions = append(slices.Clone(DefaultCautions), note)
	}
	if logo := a.str("logo", ""); logo != "" {
		p.Refs = append(p.Refs, logo)
		data, err := p.readRef(logo)
		if err != nil {
			a.fail("logo", fmt.Sprintf("cannot read the logo: %v", err))
		} else {
			sum := sha256.Sum256(data)
			r.LogoFile, r.LogoSHA256 = filepath.Base(logo), hex.EncodeToString(sum[:])
			p.Logo = data
		}
	}
	p.Report = r
	return a.diags
}

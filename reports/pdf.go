package reports

import (
	"bytes"
	"errors"
	"fmt"
	"image"
	"image/draw"
	_ "image/jpeg" // logos may be JPEG
	"image/png"
	"io"
	"slices"
	"strconv"
	"strings"
	"sync"
	"unicode"
	"unicode/utf8"

	"codeberg.org/go-fonts/liberation/liberationmonoregular"
	"codeberg.org/go-fonts/liberation/liberationsansbold"
	"codeberg.org/go-fonts/liberation/liberationsansitalic"
	"codeberg.org/go-fonts/liberation/liberationsansregular"
	"codeberg.org/go-pdf/fpdf"
	"golang.org/x/image/font/sfnt"

	"lotgate/pipeline"
	"lotgate/rules"
)

// WritePDF renders the record as a certificate of analysis. logo may be nil
// (no logo); otherwise it is a PNG or JPEG image, drawn in the page header.
//
// The certificate shows what the record holds and computes nothing: the
// verdict, each limit with the result as reported, its specification and
// conformity, the chromatogram, the peaks, the provenance with the record's
// own SHA-256 digest, signature lines and the cautions. The same record and
// logo give the same bytes.
func WritePDF(w io.Writer, rec *pipeline.Record, logo []byte) error {
	if rec == nil {
		return errors.New("pdf: no record to render")
	}
	return writePDF(w, rec, logo, digestLater(rec))
}

// writePDF is WritePDF with the record's digest supplied.
func writePDF(w io.Writer, rec *pipeline.Record, logo []byte, d digest) error {
	if rec == nil {
		return errors.New("pdf: no record to render")
	}
	c, err := newCert(rec, logo)
	if err != nil {
		return fmt.Errorf("pdf: %w", err)
	}
	c.render(d)
	if err := c.doc.Output(w); err != nil {
		return fmt.Errorf("pdf: %w", err)
	}
	return nil
}

// cert is a certificate being laid out.
type cert struct {
	*layout
	rec    *pipeline.Record
	digest string // SHA-256 of the record's JSON bytes, once render has it
}

func newCert(rec *pipeline.Record, logo []byte) (*cert, error) {
	l, err := newLayout(rec.Report, rec.Provenance.ProcessedAt, rec.Provenance.Tool+" "+rec.Provenance.Version,
		"Certificate of analysis — lot "+nonEmpty(meta(rec, "lot"), "—"),
		headline{text: "Certificate of analysis", size: 14, lines: 1}, logo)
	if err != nil {
		return nil, err
	}
	return &cert{layout: l, rec: rec}, nil
}

// registerLogo decodes the logo and adds it to the document as an 8-bit
// PNG (whatever its file's bit depth or interlacing), sized to fit the
// header.
func registerLogo(doc *fpdf.Fpdf, data []byte) (*logoImage, error) {
	const maxSide = 4096
	if cfg, _, err := image.DecodeConfig(bytes.NewReader(data)); err == nil && max(cfg.Width, cfg.Height) > maxSide {
		return nil, fmt.Errorf("logo: the image is %d×%d pixels; at most %d on a side will do for a header",
			cfg.Width, cfg.Height, maxSide)
	}
	img, _, err := image.Decode(bytes.NewReader(data))
	if err != nil {
		return nil, fmt.Errorf("logo: %w (want a PNG or JPEG image)", err)
	}
	b := img.Bounds()
	if b.Dx() < 1 || b.Dy() < 1 {
		return nil, errors.New("logo: the image is empty")
	}
	nrgba := image.NewNRGBA(image.Rect(0, 0, b.Dx(), b.Dy()))
	draw.Draw(nrgba, nrgba.Bounds(), img, b.Min, draw.Src)
	var buf bytes.Buffer
	if err := png.Encode(&buf, nrgba); err != nil {
		return nil, fmt.Errorf("logo: %w", err)
	}
	doc.RegisterImageOptionsReader("logo", fpdf.ImageOptions{ImageType: "PNG"}, &buf)
	const maxW, maxH = 34.0, 17.0
	w, h := maxW, maxW*float64(b.Dy())/float64(b.Dx())
	if h > maxH {
		w, h = maxH*float64(b.Dx())/float64(b.Dy()), maxH
	}
	return &logoImage{w: w, h: h}, nil
}

// meta returns the record's metadata value for key ("" when absent).
func meta(rec *pipeline.Record, key string) string {
	for _, m := range rec.Sample.Metadata {
		if m.Key == key {
			return m.Value
		}
	}
	return ""
}

// fonts are the embedded fonts: family, style and TrueType bytes.
var fonts = []struct {
	family, style string
	ttf           []byte
}{
	{fontSans, "", liberationsansregular.TTF},
	{fontSans, "B", liberationsansbold.TTF},
	{fontSans, "I", liberationsansitalic.TTF},
	{fontMono, "", liberationmonoregular.TTF},
}

// drawable says, for each rune of the Basic Multilingual Plane, whether
// every embedded font has a glyph for it.
var drawable = sync.OnceValue(func() []bool {
	ok := make([]bool, 1<<16)
	for i := range ok {
		ok[i] = true
	}
	var buf sfnt.Buffer
	for _, fnt := range fonts {
		f, err := sfnt.Parse(fnt.ttf)
		if err != nil {
			panic("pdf: an embedded Liberation font does not parse: " + err.Error())
		}
		for r := range ok {
			if g, err := f.GlyphIndex(&buf, rune(r)); err != nil || g == 0 {
				ok[r] = false
			}
		}
	}
	return ok
})

// clean makes s drawable: control characters become spaces and characters
// the fonts cannot show (or bytes that are not UTF-8) become "?".
func clean(s string) string {
	ok := drawable()
	valid := utf8.ValidString(s)
	for _, r := range s {
		if !valid || r > 0xffff || !ok[r] || unicode.IsControl(r) {
			valid = false
			break
		}
	}
	if valid {
		return s
	}
	var b strings.Builder
	for _, r := range s {
		switch {
		case unicode.IsControl(r):
			b.WriteByte(' ')
		case r > 0xffff || !ok[r] || r == utf8.RuneError:
			b.WriteByte('?')
		default:
			b.WriteRune(r)
		}
	}
	return b.String()
}

// drawFooters writes "Page N of M" and the record's identity on every page.
func (c *cert) drawFooters() {
	c.font(fontSans, "", 7.5)
	part := func(s string) string { return c.wrap(nonEmpty(s, "—"), 45, 1)[0] }
	c.footers("Lot "+part(meta(c.rec, "lot"))+" · sample "+part(meta(c.rec, "sample_id"))+
		" · record SHA-256 "+c.digest[:16]+"…", true)
}

// render lays out the whole certificate; digest waits for the record's
// digest.
func (c *cert) render(digest func() (string, error)) {
	c.newPage()
	c.sampleBlock()
	c.verdictBlock()
	c.resultsTable()
	c.warnings()
	c.figure()
	c.peaksTable()
	var err error
	if c.digest, err = digest(); err != nil {
		c.doc.SetError(fmt.Errorf("encoding the record for its digest: %w", err))
		return
	}
	c.provenance()
	c.signatures()
	c.cautions()
	c.drawFooters()
}

// bullet writes a list item: a bullet at indent and the text wrapped
// beside it, breaking pages between lines.
func (c *cert) bullet(s string, size, indent float64) {
	c.font(fontSans, "", size)
	for k, l := range c.wrap(s, c.right-c.left-indent-3, 0) {
		c.ensure(lineH(size))
		c.font(fontSans, "", size)
		c.ink(black)
		if k == 0 {
			c.text(c.left+indent, c.y, size, "•")
		}
		c.text(c.left+indent+3, c.y, size, l)
		c.y += lineH(size)
	}
}

// Sections.

// sampleBlock lists what was analysed, in two columns of label and value.
func (c *cert) sampleBlock() {
	rec := c.rec
	type item struct{ k, v string }
	items := []item{{"Lot", nonEmpty(meta(rec, "lot"), "—")}, {"Sample", nonEmpty(meta(rec, "sample_id"), "—")}}
	for _, m := range []struct{ k, key string }{
		{"Sample type", "sample_type"}, {"Injected", "injection_time"},
		{"Instrument", "instrument"}, {"Operator", "operator"},
	} {
		if v := meta(rec, m.key); v != "" {
			items = append(items, item{m.k, v})
		}
	}
	items = append(items,
		item{"Method", nonEmpty(rec.Method.Name, "—") + ", revision " + strconv.Itoa(rec.Method.Revision)},
		item{"Processed", nonEmpty(rec.Provenance.ProcessedAt, "—")})
	c.section("Sample", 10)
	t := c.newTable("", 8.5, 3, false,
		column{share: 17}, column{share: 33}, column{share: 17}, column{share: 33})
	for i := 0; i < len(items); i += 2 {
		cells := []cell{{text: items[i].k, color: &grey}, {text: items[i].v, bold: true}, {}, {}}
		if i+1 < len(items) {
			cells[2], cells[3] = cell{text: items[i+1].k, color: &grey}, cell{text: items[i+1].v, bold: true}
		}
		t.row(cells...)
	}
}

// verdictWords returns the verdict sentence and its colours.
func (c *cert) verdictWords() (string, rgb, rgb) {
	subject := "The lot"
	if st := meta(c.rec, "sample_type"); st != "" && st != "sample" {
		subject = "The " + st + " run"
	}
	switch c.rec.Verdict {
	case rules.Pass:
		return subject + " CONFORMS to the specification", passInk, passFill
	case rules.Fail:
		return subject + " DOES NOT CONFORM to the specification", failInk, failFill
	}
	return "Conformity of " + strings.ToLower(subject[:1]) + subject[1:] + " COULD NOT BE DETERMINED",
		undetInk, undetFill
}

// verdictBlock states the verdict in large type, with the reasons of the
// limits that failed or could not be checked.
func (c *cert) verdictBlock() {
	words, ink, fill := c.verdictWords()
	const big, small = 15.0, 8.5
	inner := c.right - c.left - 8
	c.font(fontSans, "B", big)
	head := c.wrap(words, inner, 3)
	var notes []boxNote
	c.font(fontSans, "", small)
	for _, l := range c.rec.Limits {
		if l.Status == rules.Pass {
			continue
		}
		what := "does not conform"
		if l.Status != rules.Fail {
			what = "not determined"
		}
		reason := nonEmpty(l.Reason, "no reason recorded")
		for k, line := range c.wrap(l.Name+" ("+what+"): "+reason, inner-3, 3) {
			notes = append(notes, boxNote{line, k == 0, 3})
		}
	}
	if len(c.rec.Limits) == 0 {
		notes = append(notes, boxNote{text: "No specification limit applied to this run."})
	}
	c.verdictBox(head, big, notes, small, ink, fill)
}

// specification writes a limit's bounds: "≥ 99.80", "≤ 0.010" or "0.10 – 0.20".
func specification(l pipeline.LimitRec) string {
	switch {
	case l.Min != "" && l.Max != "":
		return l.Min + " – " + l.Max
	case l.Min != "":
		return "≥ " + l.Min
	case l.Max != "":
		return "≤ " + l.Max
	}
	return "—"
}

// conformity words a limit's status.
func conformity(status string) (string, *rgb) {
	switch status {
	case rules.Pass:
		return "conforms", &passInk
	case rules.Fail:
		return "does not conform", &failInk
	}
	return "not determined", &undetInk
}

// roundingWords says how results were rounded before comparison.
var roundingWords = map[string]string{
	string(rules.E29):      "ASTM E29 rounding method (a tie rounds to the even digit)",
	string(rules.HalfUp):   "rounded half up",
	string(rules.Absolute): "ASTM E29 absolute method (the unrounded value is compared)",
}

// resultsTable lists each limit: the result as reported against its
// specification.
func (c *cert) resultsTable() {
	if len(c.rec.Limits) == 0 {
		return
	}
	c.section("Results against the specification", 14)
	t := c.newTable("Results against the specification", 8.5, 3, true,
		column{head: "Test", share: 46}, column{head: "Result", share: 22, right: true},
		column{head: "Specification", share: 28, inset: 4}, column{head: "Unit", share: 34},
		column{head: "Conformity", share: 26})
	t.start(8)
	var rounding []string
	for _, l := range c.rec.Limits {
		word, col := conformity(l.Status)
		var fill *rgb
		switch l.Status {
		case rules.Pass:
		case rules.Fail:
			fill = &failFill
		default:
			fill = &undetFill
		}
		t.filledRow([]cell{
			{text: l.Name}, {text: nonEmpty(l.Reported, "—"), bold: true},
			{text: specification(l)}, {text: nonEmpty(l.Unit, "—")},
			{text: word, bold: l.Status != rules.Pass, color: col},
		}, fill)
		if w, ok := roundingWords[l.Rounding]; ok && !slices.Contains(rounding, w) {
			rounding = append(rounding, w)
		}
	}
	if len(rounding) > 0 {
		c.y += 1
		c.paragraph("Each result is reported to the decimals of its specification and compared with it after rounding: "+
			strings.Join(rounding, "; ")+".", "I", 7.5, grey, 0)
	}
}

// warnings lists the record's processing warnings.
func (c *cert) warnings() {
	if len(c.rec.Warnings) == 0 {
		return
	}
	c.y += 2
	c.ensure(lineH(8.5) + lineH(8))
	c.font(fontSans, "B", 8.5)
	c.ink(undetInk)
	c.text(c.left, c.y, 8.5, "Processing warnings")
	c.y += lineH(8.5)
	for _, w := range c.rec.Warnings {
		c.bullet(w, 8, 2)
	}
}

// figure draws the chromatogram.
func (c *cert) figure() {
	panels := figurePanels(c.rec)
	if len(panels) == 0 {
		c.section("Chromatogram", 6)
		c.paragraph("The record holds no trace to draw.", "I", 8.5, grey, 0)
		return
	}
	heights := []float64{72}
	if len(panels) == 2 {
		heights = []float64{56, 50}
	}
	caption := "Signal and baseline (dashed) against time. Identified peaks are named at their apexes; " +
		"the other peaks show their number in the peaks table."
	if len(c.rec.Trace.Processed) == 0 {
		caption = "Raw signal and baseline (dashed) against time. Identified peaks are named at their apexes; " +
			"the other peaks show their number in the peaks table."
	}
	total := 0.0
	for _, h := range heights {
		total += h + 2
	}
	// Rather than leave much of a page empty, the figure shrinks by up to a
	// quarter to fit what is left of it.
	left := c.bottom - c.y - 3 - lineH(10.5) - 2.2 - 2*lineH(7.5)
	if left < total && left >= 0.75*total {
		for i := range heights {
			heights[i] *= left / total
		}
		total = left
	}
	c.section("Chromatogram", total+lineH(7.5)*2)
	for i, p := range panels {
		drawPanel(c.doc, c.rec, p, c.left, c.y, c.right-c.left, heights[i])
		c.y += heights[i] + 2
	}
	c.resetGraphics()
	c.paragraph(caption, "I", 7.5, grey, 0)
}

// fixed writes x with the given decimals, rounding its shortest decimal
// form half to even as the limits do; "—" when x is not finite.
func fixed(x float64, digits int) string {
	d, err := rules.Decimal(x)
	if err != nil {
		return "—"
	}
	s, err := rules.Round(d, digits, rules.E29)
	if err != nil {
		return "—"
	}
	return s
}

func fixedPtr(x *float64, digits int) string {
	if x == nil {
		return "—"
	}
	return fixed(*x, digits)
}

// peaksTable lists every peak.
func (c *cert) peaksTable() {
	rec := c.rec
	c.section("Peaks", 14)
	if len(rec.Peaks) == 0 {
		c.paragraph("No peaks were detected.", "", 8.5, black, 0)
	} else {
		pct := "Percent"
		if rec.Quant != nil {
			switch rec.Quant.Method {
			case "area-percent":
				pct = "Area %"
			case "normalized":
				pct = "Normalized %"
			}
		}
		timeU := clean(nonEmpty(rec.Units.Time, "min"))
		t := c.newTable("Peaks", 8, 2, true,
			column{head: "No.", share: 9, right: true}, column{head: "Peak", share: 50},
			column{head: "RT (" + timeU + ")", share: 19, right: true},
			column{head: "Area (" + nonEmpty(rec.Units.Area, "—") + ")", share: 28, right: true},
			column{head: "Height (" + nonEmpty(rec.Units.Signal, "—") + ")", share: 25, right: true},
			column{head: pct, share: 24, right: true}, column{head: "S/N", share: 19, right: true})
		t.start(6)
		belowThreshold := false
		for _, p := range rec.Peaks {
			percent := fixedPtr(p.Percent, 3)
			if p.Percent != nil && !p.Reported && rec.Quant != nil {
				percent = "< " + strconv.FormatFloat(rec.Quant.ReportingThreshold, 'g', -1, 64) + " *"
				belowThreshold = true
			}
			t.row(cell{text: strconv.Itoa(p.Number)}, cell{text: p.Name, bold: p.Component != ""},
				cell{text: fixed(p.RTMin, 3)}, cell{text: fixed(p.Area, 2)}, cell{text: fixed(p.Height, 2)},
				cell{text: percent}, cell{text: fixed(p.SNR, 1)})
		}
		if belowThreshold {
			c.y += 1
			c.paragraph("* below the reporting threshold: not reported as a number and not counted in the totals.",
				"I", 7.5, grey, 0)
		}
	}
	var missing []string
	for _, comp := range rec.Components {
		switch comp.Status {
		case "found":
		case "not-detected":
			missing = append(missing, comp.Name+" (not detected)")
		default:
			missing = append(missing, comp.Name+" ("+comp.Status+")")
		}
	}
	if len(missing) > 0 {
		c.y += 1
		c.paragraph("Components without a peak: "+strings.Join(missing, ", ")+".", "", 8, black, 0)
	}
}

// provenance ties the certificate to its data, its method and its record.
func (c *cert) provenance() {
	rec, pv := c.rec, c.rec.Provenance
	c.section("Provenance", 20)
	t := c.newTable("Provenance", 8, 3, false, column{share: 28}, column{share: 72})
	kv := func(k, v string, mono bool) {
		t.row(cell{text: k, color: &grey}, cell{text: v, mono: mono})
	}
	kv("Software", strings.TrimSpace(pv.Tool+" "+pv.Version), false)
	kv("Pipeline file", nonEmpty(pv.PipelineFile, "—"), false)
	kv("Pipeline SHA-256", nonEmpty(pv.PipelineSHA256, "—"), true)
	if pv.BundleSHA256 != "" {
		kv("Frozen bundle SHA-256", pv.BundleSHA256, true)
	}
	if rec.Method.Description != "" {
		kv("Method", rec.Method.Description, false)
	}
	kv("Data file", nonEmpty(pv.InputFile, "—"), false)
	kv("Data file SHA-256", nonEmpty(pv.InputSHA256, "—"), true)
	if rec.Report.LogoFile != "" {
		kv("Logo file", rec.Report.LogoFile, false)
		kv("Logo SHA-256", nonEmpty(rec.Report.LogoSHA256, "—"), true)
	}
	kv("Record SHA-256", c.digest+" (the JSON record this certificate renders)", true)
	if pv.LedgerHead != "" {
		kv("Ledger entry", pv.LedgerHead, true)
	}
	kv("Processed at", nonEmpty(pv.ProcessedAt, "—"), false)
}

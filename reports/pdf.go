package reports

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
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
	"time"
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
	c, err := newCert(rec, logo)
	if err != nil {
		return fmt.Errorf("pdf: %w", err)
	}
	// Encoding a long trace for the record's digest takes as long as the
	// rest of the certificate: it runs alongside the layout.
	type result struct {
		digest string
		err    error
	}
	digest := make(chan result, 1)
	go func() {
		data, err := rec.Marshal()
		sum := sha256.Sum256(data)
		digest <- result{hex.EncodeToString(sum[:]), err}
	}()
	c.render(func() (string, error) { r := <-digest; return r.digest, r.err })
	if err := c.doc.Output(w); err != nil {
		return fmt.Errorf("pdf: %w", err)
	}
	return nil
}

// Font families registered in every certificate.
const (
	fontSans = "sans"
	fontMono = "mono"
)

// rgb is a colour.
type rgb struct{ r, g, b int }

var (
	black     = rgb{0x1a, 0x1a, 0x1a}
	grey      = rgb{0x5f, 0x5f, 0x5f}
	ruleGrey  = rgb{0xb4, 0xb4, 0xb4}
	headFill  = rgb{0xec, 0xee, 0xf1}
	passInk   = rgb{0x1b, 0x6e, 0x2f}
	passFill  = rgb{0xe6, 0xf3, 0xe8}
	failInk   = rgb{0xa8, 0x1b, 0x1b}
	failFill  = rgb{0xfb, 0xe9, 0xe7}
	undetInk  = rgb{0x8a, 0x5a, 0x00}
	undetFill = rgb{0xfd, 0xf3, 0xdc}
)

// Page geometry in millimetres.
const (
	marginX      = 16.0
	marginTop    = 12.0
	footerHeight = 16.0 // from the page's bottom edge to the body's end
	pad          = 1.2  // inside table cells
)

// cert is a certificate being laid out.
type cert struct {
	doc     *fpdf.Fpdf
	rec     *pipeline.Record
	digest  string // SHA-256 of the record's JSON bytes, once render has it
	logo    *logoImage
	pageH   float64
	left    float64 // body's left and right edges
	right   float64
	bottom  float64 // body's lowest y
	y       float64 // where the next block goes
	headerH float64
}

// logoImage is the logo registered with the document and its drawn size.
type logoImage struct{ w, h float64 }

func newCert(rec *pipeline.Record, logo []byte) (*cert, error) {
	size := "a4"
	switch rec.Report.Paper {
	case "", "A4":
	case "Letter":
		size = "letter"
	default:
		return nil, fmt.Errorf("paper %q is not known: want A4 or Letter", rec.Report.Paper)
	}
	at, err := time.Parse(time.RFC3339, rec.Provenance.ProcessedAt)
	if err != nil {
		return nil, fmt.Errorf("processed_at %q is not an RFC 3339 time", rec.Provenance.ProcessedAt)
	}
	if at.IsZero() { // fpdf would write the clock's time instead
		at = time.Unix(0, 0)
	}
	doc := fpdf.NewCustom(&fpdf.InitType{OrientationStr: "P", UnitStr: "mm", SizeStr: size})
	doc.SetCatalogSort(true)
	doc.SetCreationDate(at.UTC())
	doc.SetModificationDate(at.UTC())
	doc.SetAutoPageBreak(false, 0)
	doc.SetMargins(marginX, marginTop, marginX)
	doc.SetCreator(rec.Provenance.Tool+" "+rec.Provenance.Version, true)
	doc.SetTitle("Certificate of analysis — lot "+nonEmpty(meta(rec, "lot"), "—"), true)
	doc.SetSubject(strings.TrimSpace(rec.Report.Product+" "+rec.Report.Grade), true)
	doc.SetAuthor(rec.Report.Site, true)
	for _, f := range fonts {
		doc.AddUTF8FontFromBytes(f.family, f.style, f.ttf)
	}
	pw, ph := doc.GetPageSize()
	c := &cert{doc: doc, rec: rec, pageH: ph, left: marginX, right: pw - marginX, bottom: ph - footerHeight}
	if len(logo) > 0 {
		if c.logo, err = registerLogo(doc, logo); err != nil {
			return nil, err
		}
	}
	return c, doc.Error()
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

// Text helpers. Sizes are in points, positions in millimetres.

func (c *cert) font(family, style string, size float64) { c.doc.SetFont(family, style, size) }

func (c *cert) ink(col rgb) { c.doc.SetTextColor(col.r, col.g, col.b) }

// lineH is the height of a line of text of the given size.
func lineH(size float64) float64 { return size * 1.22 * mmPerPoint }

// text draws s with its line box's top-left corner at (x, top).
func (c *cert) text(x, top, size float64, s string) {
	c.doc.Text(x, top+0.95*size*mmPerPoint, s)
}

// textRight draws s ending at x.
func (c *cert) textRight(x, top, size float64, s string) {
	c.text(x-c.doc.GetStringWidth(s), top, size, s)
}

// wrap breaks s into lines no wider than w in the current font: at spaces,
// and inside words too long for a line. With maxLines > 0 the text is cut
// to that many lines, the last ending in an ellipsis.
func (c *cert) wrap(s string, w float64, maxLines int) []string {
	width := c.doc.GetStringWidth
	var lines []string
	cur := ""
	for _, word := range strings.Fields(clean(s)) {
		cand := word
		if cur != "" {
			cand = cur + " " + word
		}
		if width(cand) <= w {
			cur = cand
			continue
		}
		if cur != "" {
			lines = append(lines, cur)
		}
		for width(word) > w {
			k := fitPrefix(word, w, width)
			lines = append(lines, word[:k])
			word = word[k:]
		}
		cur = word
	}
	if cur != "" {
		lines = append(lines, cur)
	}
	if maxLines > 0 && len(lines) > maxLines {
		lines = lines[:maxLines]
		last := lines[maxLines-1]
		for last != "" && width(last+"…") > w {
			_, n := utf8.DecodeLastRuneInString(last)
			last = strings.TrimRight(last[:len(last)-n], " ")
		}
		lines[maxLines-1] = last + "…"
	}
	return lines
}

// fitPrefix returns the byte length of the longest prefix of word (at least
// one rune) no wider than w.
func fitPrefix(word string, w float64, width func(string) float64) int {
	k := 0
	for i, r := range word {
		end := i + utf8.RuneLen(r)
		if k > 0 && width(word[:end]) > w {
			break
		}
		k = end
	}
	return k
}

// Page structure.

// newPage starts a page with its header.
func (c *cert) newPage() {
	c.doc.AddPage()
	c.drawHeader()
	c.y = marginTop + c.headerH + 5
}

// ensure starts a new page unless h millimetres fit below c.y; it reports
// whether it did.
func (c *cert) ensure(h float64) bool {
	if c.y+h <= c.bottom {
		return false
	}
	c.newPage()
	return true
}

// headerBlocks are the header's lines: the site's (left) and the
// document's (right).
func (c *cert) headerBlocks(leftW, rightW float64) (left, right []styledLine) {
	rs := c.rec.Report
	add := func(dst *[]styledLine, s string, style string, size float64, col rgb, w float64, maxLines int) {
		c.font(fontSans, style, size)
		for _, l := range c.wrap(s, w, maxLines) {
			*dst = append(*dst, styledLine{l, style, size, col})
		}
	}
	add(&left, rs.Site, "B", 10.5, black, leftW, 2)
	for _, a := range rs.Address[:min(len(rs.Address), 4)] {
		add(&left, a, "", 8, grey, leftW, 1)
	}
	add(&right, "Certificate of analysis", "B", 14, black, rightW, 1)
	add(&right, rs.Product, "B", 9.5, black, rightW, 2)
	add(&right, rs.Grade, "", 8.5, grey, rightW, 2)
	return left, right
}

// styledLine is one line of the header.
type styledLine struct {
	text  string
	style string
	size  float64
	col   rgb
}

func blockHeight(ls []styledLine) float64 {
	h := 0.0
	for _, l := range ls {
		h += lineH(l.size)
	}
	return h
}

// headerGeometry returns the left text column's x and width and the right
// column's width.
func (c *cert) headerGeometry() (leftX, leftW, rightW float64) {
	leftX = c.left
	if c.logo != nil {
		leftX += c.logo.w + 4
	}
	rightW = 0.4 * (c.right - c.left)
	return leftX, c.right - rightW - 4 - leftX, rightW
}

// drawHeader draws the page header and sets c.headerH.
func (c *cert) drawHeader() {
	leftX, leftW, rightW := c.headerGeometry()
	left, right := c.headerBlocks(leftW, rightW)
	h := max(blockHeight(left), blockHeight(right))
	if c.logo != nil {
		h = max(h, c.logo.h)
		c.doc.ImageOptions("logo", c.left, marginTop, c.logo.w, c.logo.h, false, fpdf.ImageOptions{ImageType: "PNG"}, 0, "")
	}
	y := marginTop
	for _, l := range left {
		c.font(fontSans, l.style, l.size)
		c.ink(l.col)
		c.text(leftX, y, l.size, l.text)
		y += lineH(l.size)
	}
	y = marginTop
	for _, l := range right {
		c.font(fontSans, l.style, l.size)
		c.ink(l.col)
		c.textRight(c.right, y, l.size, l.text)
		y += lineH(l.size)
	}
	c.headerH = h
	c.hrule(marginTop+h+2, 0.4, black)
}

// hrule draws a full-width horizontal line at y.
func (c *cert) hrule(y, width float64, col rgb) {
	c.doc.SetDrawColor(col.r, col.g, col.b)
	c.doc.SetLineWidth(width)
	c.doc.Line(c.left, y, c.right, y)
}

// drawFooters writes "Page N of M" and the record's identity on every page.
func (c *cert) drawFooters() {
	n := c.doc.PageCount()
	c.font(fontSans, "", 7.5)
	part := func(s string) string { return c.wrap(nonEmpty(s, "—"), 45, 1)[0] }
	id := "Lot " + part(meta(c.rec, "lot")) + " · sample " + part(meta(c.rec, "sample_id")) +
		" · record SHA-256 " + c.digest[:16] + "…"
	for p := 1; p <= n; p++ {
		c.doc.SetPage(p)
		y := c.pageH - footerHeight + 4
		c.hrule(y, 0.3, ruleGrey)
		c.doc.SetFillColor(255, 255, 255)
		c.font(fontSans, "", 7.5)
		c.ink(grey)
		page := fmt.Sprintf("Page %d of %d", p, n)
		idW := c.right - c.left - c.doc.GetStringWidth(page) - 6
		c.text(c.left, y+1.5, 7.5, c.wrap(id, idW, 1)[0])
		c.textRight(c.right, y+1.5, 7.5, page)
	}
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

// section starts a titled section, keeping at least keep millimetres of
// what follows on the same page as the title.
func (c *cert) section(title string, keep float64) {
	const size = 10.5
	c.y += 3
	c.ensure(lineH(size) + 2 + keep)
	c.font(fontSans, "B", size)
	c.ink(black)
	c.text(c.left, c.y, size, title)
	c.y += lineH(size) + 0.6
	c.hrule(c.y, 0.25, ruleGrey)
	c.y += 1.6
}

// paragraph writes wrapped text across the body, breaking pages between
// lines; indent shifts it right.
func (c *cert) paragraph(s, style string, size float64, col rgb, indent float64) {
	c.font(fontSans, style, size)
	for _, l := range c.wrap(s, c.right-c.left-indent, 0) {
		c.ensure(lineH(size))
		c.font(fontSans, style, size) // a new page's header changes the font
		c.ink(col)
		c.text(c.left+indent, c.y, size, l)
		c.y += lineH(size)
	}
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

// Tables.

// column is a table column: its heading, its share of the body's width and
// its alignment.
type column struct {
	head  string
	share float64
	right bool
	inset float64 // extra left space, to set a column off its neighbour
}

// cell is one table cell.
type cell struct {
	text  string
	bold  bool
	mono  bool
	color *rgb
}

// table lays out rows under a heading row that is repeated on every page
// the table reaches. Cells wrap to at most maxLines lines.
type table struct {
	c        *cert
	cols     []column
	widths   []float64
	size     float64
	maxLines int
	title    string // shown above the heading row on continuation pages
	header   bool
}

func (c *cert) newTable(title string, size float64, maxLines int, header bool, cols ...column) *table {
	t := &table{c: c, cols: cols, size: size, maxLines: maxLines, title: title, header: header}
	total := 0.0
	for _, col := range cols {
		total += col.share
	}
	for _, col := range cols {
		t.widths = append(t.widths, col.share/total*(c.right-c.left))
	}
	return t
}

// layout wraps the cells of a row and returns the lines and the row's height.
func (t *table) layout(cells []cell) ([][]string, float64) {
	lines := make([][]string, len(cells))
	n := 1
	for i, cl := range cells {
		t.setFont(cl)
		lines[i] = t.c.wrap(cl.text, t.widths[i]-2*pad-t.cols[i].inset, t.maxLines)
		n = max(n, len(lines[i]))
	}
	return lines, float64(n)*lineH(t.size) + 2*pad
}

func (t *table) setFont(cl cell) {
	switch {
	case cl.mono:
		t.c.font(fontMono, "", t.size)
	case cl.bold:
		t.c.font(fontSans, "B", t.size)
	default:
		t.c.font(fontSans, "", t.size)
	}
}

func (t *table) headCells() []cell {
	cells := make([]cell, len(t.cols))
	for i, col := range t.cols {
		cells[i] = cell{text: col.head, bold: true}
	}
	return cells
}

// start draws the heading row, keeping the first row of height first with it.
func (t *table) start(first float64) {
	if !t.header {
		t.c.ensure(first)
		return
	}
	lines, h := t.layout(t.headCells())
	t.c.ensure(h + first)
	t.draw(t.headCells(), lines, h, &headFill)
}

// row draws a row, continuing the table on a new page when it does not fit.
func (t *table) row(cells []cell) { t.filledRow(cells, nil) }

// filledRow draws a row on a background colour (nil: none).
func (t *table) filledRow(cells []cell, fill *rgb) {
	lines, h := t.layout(cells)
	if t.c.ensure(h) {
		if t.title != "" {
			t.c.font(fontSans, "B", 8.5)
			t.c.ink(grey)
			t.c.text(t.c.left, t.c.y, 8.5, t.title+" (continued)")
			t.c.y += lineH(8.5) + 1
		}
		t.start(h)
	}
	t.draw(cells, lines, h, fill)
}

func (t *table) draw(cells []cell, lines [][]string, h float64, fill *rgb) {
	c := t.c
	if fill != nil {
		c.doc.SetFillColor(fill.r, fill.g, fill.b)
		c.doc.Rect(c.left, c.y, c.right-c.left, h, "F")
	}
	x := c.left
	for i, cl := range cells {
		t.setFont(cl)
		c.ink(black)
		if cl.color != nil {
			c.ink(*cl.color)
		}
		for k, l := range lines[i] {
			top := c.y + pad + float64(k)*lineH(t.size)
			if t.cols[i].right {
				c.textRight(x+t.widths[i]-pad, top, t.size, l)
			} else {
				c.text(x+pad+t.cols[i].inset, top, t.size, l)
			}
		}
		x += t.widths[i]
	}
	c.y += h
	c.doc.SetDrawColor(ruleGrey.r, ruleGrey.g, ruleGrey.b)
	c.doc.SetLineWidth(0.15)
	c.doc.Line(c.left, c.y, c.right, c.y)
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
		t.row(cells)
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
	type note struct {
		text   string
		bullet bool // the first line of a limit's item
		indent float64
	}
	var notes []note
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
			notes = append(notes, note{line, k == 0, 3})
		}
	}
	if len(c.rec.Limits) == 0 {
		notes = append(notes, note{text: "No specification limit applied to this run."})
	}
	h := float64(len(head))*lineH(big) + float64(len(notes))*lineH(small) + 6
	if len(notes) > 0 {
		h += 1.5
	}
	c.y += 4
	c.ensure(h)
	c.doc.SetFillColor(fill.r, fill.g, fill.b)
	c.doc.Rect(c.left, c.y, c.right-c.left, h, "F")
	c.doc.SetFillColor(ink.r, ink.g, ink.b)
	c.doc.Rect(c.left, c.y, 1.8, h, "F")
	y := c.y + 3
	c.font(fontSans, "B", big)
	c.ink(ink)
	for _, l := range head {
		c.text(c.left+5, y, big, l)
		y += lineH(big)
	}
	y += 1.5
	c.font(fontSans, "", small)
	c.ink(black)
	for _, n := range notes {
		if n.bullet {
			c.text(c.left+5, y, small, "•")
		}
		c.text(c.left+5+n.indent, y, small, n.text)
		y += lineH(small)
	}
	c.y += h
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

// resetGraphics re-sets the drawing state fpdf remembers after a figure,
// whose own state ended with its transformation.
func (c *cert) resetGraphics() {
	c.doc.SetDashPattern(nil, 0)
	c.doc.SetLineWidth(0.2)
	c.doc.SetDrawColor(0, 0, 0)
	c.doc.SetFillColor(255, 255, 255)
	c.ink(black)
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
			t.row([]cell{
				{text: strconv.Itoa(p.Number)}, {text: p.Name, bold: p.Component != ""},
				{text: fixed(p.RTMin, 3)}, {text: fixed(p.Area, 2)}, {text: fixed(p.Height, 2)},
				{text: percent}, {text: fixed(p.SNR, 1)},
			})
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
		t.row([]cell{{text: k, color: &grey}, {text: v, mono: mono}})
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

// signatures draws a name, signature and date line for each role.
func (c *cert) signatures() {
	roles := c.rec.Report.Signatures
	if len(roles) == 0 {
		return
	}
	const rowH = 15.0
	c.section("Review and release", rowH)
	w := c.right - c.left
	roleW := 0.30 * w
	fields := []struct {
		label string
		share float64
	}{{"Name", 0.27}, {"Signature", 0.25}, {"Date", 0.14}}
	for _, role := range roles {
		c.ensure(rowH)
		c.font(fontSans, "B", 8.5)
		c.ink(black)
		lines := c.wrap(role, roleW-3, 2)
		for k, l := range lines { // the last line sits on the signature lines
			c.text(c.left, c.y+10-float64(len(lines)-k)*lineH(8.5), 8.5, l)
		}
		x := c.left + roleW
		for _, f := range fields {
			fw := f.share * w
			c.doc.SetDrawColor(grey.r, grey.g, grey.b)
			c.doc.SetLineWidth(0.25)
			c.doc.Line(x, c.y+10, x+fw-4, c.y+10)
			c.font(fontSans, "", 6.5)
			c.ink(grey)
			c.text(x, c.y+10.6, 6.5, f.label)
			x += fw
		}
		c.y += rowH
	}
}

// cautions lists the record's cautions; the default cautions are always
// shown, whatever the record says.
func (c *cert) cautions() {
	list := slices.Clone(c.rec.Report.Cautions)
	for i := len(pipeline.DefaultCautions) - 1; i >= 0; i-- {
		if d := pipeline.DefaultCautions[i]; !slices.Contains(list, d) {
			list = slices.Insert(list, 0, d)
		}
	}
	c.section("Cautions", 3*lineH(8))
	for i, s := range list {
		c.font(fontSans, "", 8)
		lines := c.wrap(s, c.right-c.left-6, 0)
		for k, l := range lines {
			c.ensure(lineH(8))
			c.font(fontSans, "", 8)
			c.ink(black)
			if k == 0 {
				c.text(c.left, c.y, 8, strconv.Itoa(i+1)+".")
			}
			c.text(c.left+6, c.y, 8, l)
			c.y += lineH(8)
		}
		c.y += 0.8
	}
}

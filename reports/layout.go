package reports

import (
	"fmt"
	"slices"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"

	"codeberg.org/go-pdf/fpdf"

	"lotgate/pipeline"
)

// Font families registered in every document.
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

// layout is a PDF document being laid out in the house style: pages of
// the report's paper, each with the site's header, a body between the
// margins and the footer, and the embedded fonts. The certificate and the
// lot summary are both laid out on one.
type layout struct {
	doc      *fpdf.Fpdf
	report   pipeline.ReportSettings // the site, address, product and grade of the header
	headline headline
	logo     *logoImage
	pageH    float64
	left     float64 // body's left and right edges
	right    float64
	bottom   float64 // body's lowest y
	y        float64 // where the next block goes
}

// headline is the document's name at the top right of every page.
type headline struct {
	text  string
	size  float64 // points
	lines int     // at most
}

// logoImage is the logo registered with the document and its drawn size.
type logoImage struct{ w, h float64 }

// newLayout opens a document on the report's paper, dated processedAt (an
// RFC 3339 time), with the embedded fonts and the logo (PNG or JPEG; none
// when empty) registered. creator names the software and title the
// document in its properties.
func newLayout(rs pipeline.ReportSettings, processedAt, creator, title string, head headline, logo []byte) (*layout, error) {
	size := "a4"
	switch rs.Paper {
	case "", "A4":
	case "Letter":
		size = "letter"
	default:
		return nil, fmt.Errorf("paper %q is not known: want A4 or Letter", rs.Paper)
	}
	at, err := time.Parse(time.RFC3339, processedAt)
	if err != nil {
		return nil, fmt.Errorf("processed_at %q is not an RFC 3339 time", processedAt)
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
	doc.SetCreator(creator, true)
	doc.SetTitle(title, true)
	doc.SetSubject(strings.TrimSpace(rs.Product+" "+rs.Grade), true)
	doc.SetAuthor(rs.Site, true)
	for _, f := range fonts {
		doc.AddUTF8FontFromBytes(f.family, f.style, f.ttf)
	}
	pw, ph := doc.GetPageSize()
	l := &layout{doc: doc, report: rs, headline: head, pageH: ph, left: marginX, right: pw - marginX, bottom: ph - footerHeight}
	if len(logo) > 0 {
		if l.logo, err = registerLogo(doc, logo); err != nil {
			return nil, err
		}
	}
	return l, doc.Error()
}

// Text helpers. Sizes are in points, positions in millimetres.

func (l *layout) font(family, style string, size float64) { l.doc.SetFont(family, style, size) }

func (l *layout) ink(col rgb) { l.doc.SetTextColor(col.r, col.g, col.b) }

// lineH is the height of a line of text of the given size.
func lineH(size float64) float64 { return size * 1.22 * mmPerPoint }

// text draws s with its line box's top-left corner at (x, top).
func (l *layout) text(x, top, size float64, s string) {
	l.doc.Text(x, top+0.95*size*mmPerPoint, s)
}

// textRight draws s ending at x.
func (l *layout) textRight(x, top, size float64, s string) {
	l.text(x-l.doc.GetStringWidth(s), top, size, s)
}

// wrap breaks s into lines no wider than w in the current font: at spaces,
// and inside words too long for a line. With maxLines > 0 the text is cut
// to that many lines, the last ending in an ellipsis.
func (l *layout) wrap(s string, w float64, maxLines int) []string {
	width := l.doc.GetStringWidth
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

// hrule draws a full-width horizontal line at y.
func (l *layout) hrule(y, width float64, col rgb) {
	l.doc.SetDrawColor(col.r, col.g, col.b)
	l.doc.SetLineWidth(width)
	l.doc.Line(l.left, y, l.right, y)
}

// resetGraphics re-sets the drawing state fpdf remembers after a plot,
// whose own state ended with its transformation.
func (l *layout) resetGraphics() {
	l.doc.SetDashPattern(nil, 0)
	l.doc.SetLineWidth(0.2)
	l.doc.SetDrawColor(0, 0, 0)
	l.doc.SetFillColor(255, 255, 255)
	l.ink(black)
}

// Page structure.

// newPage starts a page with its header.
func (l *layout) newPage() {
	l.doc.AddPage()
	l.y = marginTop + l.drawHeader() + 5
}

// ensure starts a new page unless h millimetres fit below l.y; it reports
// whether it did.
func (l *layout) ensure(h float64) bool {
	if l.y+h <= l.bottom {
		return false
	}
	l.newPage()
	return true
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
func (l *layout) headerGeometry() (leftX, leftW, rightW float64) {
	leftX = l.left
	if l.logo != nil {
		leftX += l.logo.w + 4
	}
	rightW = 0.4 * (l.right - l.left)
	return leftX, l.right - rightW - 4 - leftX, rightW
}

// headerBlocks are the header's lines: the site's (left) and the
// document's (right).
func (l *layout) headerBlocks(leftW, rightW float64) (left, right []styledLine) {
	rs := l.report
	add := func(dst *[]styledLine, s string, style string, size float64, col rgb, w float64, maxLines int) {
		l.font(fontSans, style, size)
		for _, line := range l.wrap(s, w, maxLines) {
			*dst = append(*dst, styledLine{line, style, size, col})
		}
	}
	add(&left, rs.Site, "B", 10.5, black, leftW, 2)
	for _, a := range rs.Address[:min(len(rs.Address), 4)] {
		add(&left, a, "", 8, grey, leftW, 1)
	}
	add(&right, l.headline.text, "B", l.headline.size, black, rightW, l.headline.lines)
	add(&right, rs.Product, "B", 9.5, black, rightW, 2)
	add(&right, rs.Grade, "", 8.5, grey, rightW, 2)
	return left, right
}

// drawHeader draws the page header and returns its height.
func (l *layout) drawHeader() float64 {
	leftX, leftW, rightW := l.headerGeometry()
	left, right := l.headerBlocks(leftW, rightW)
	h := max(blockHeight(left), blockHeight(right))
	if l.logo != nil {
		h = max(h, l.logo.h)
		l.doc.ImageOptions("logo", l.left, marginTop, l.logo.w, l.logo.h, false, fpdf.ImageOptions{ImageType: "PNG"}, 0, "")
	}
	y := marginTop
	for _, s := range left {
		l.font(fontSans, s.style, s.size)
		l.ink(s.col)
		l.text(leftX, y, s.size, s.text)
		y += lineH(s.size)
	}
	y = marginTop
	for _, s := range right {
		l.font(fontSans, s.style, s.size)
		l.ink(s.col)
		l.textRight(l.right, y, s.size, s.text)
		y += lineH(s.size)
	}
	l.hrule(marginTop+h+2, 0.4, black)
	return h
}

// footers writes id (cut to fit) and "Page N of M" on every page, under a
// rule; with whiteFill the fill colour is set to white on each page first.
func (l *layout) footers(id string, whiteFill bool) {
	n := l.doc.PageCount()
	for p := 1; p <= n; p++ {
		l.doc.SetPage(p)
		y := l.pageH - footerHeight + 4
		l.hrule(y, 0.3, ruleGrey)
		if whiteFill {
			l.doc.SetFillColor(255, 255, 255)
		}
		l.font(fontSans, "", 7.5)
		l.ink(grey)
		page := fmt.Sprintf("Page %d of %d", p, n)
		idW := l.right - l.left - l.doc.GetStringWidth(page) - 6
		l.text(l.left, y+1.5, 7.5, l.wrap(id, idW, 1)[0])
		l.textRight(l.right, y+1.5, 7.5, page)
	}
}

// Blocks.

// section starts a titled section, keeping at least keep millimetres of
// what follows on the same page as the title.
func (l *layout) section(title string, keep float64) {
	const size = 10.5
	l.y += 3
	l.ensure(lineH(size) + 2 + keep)
	l.font(fontSans, "B", size)
	l.ink(black)
	l.text(l.left, l.y, size, clean(title))
	l.y += lineH(size) + 0.6
	l.hrule(l.y, 0.25, ruleGrey)
	l.y += 1.6
}

// paragraph writes wrapped text across the body, breaking pages between
// lines; indent shifts it right.
func (l *layout) paragraph(s, style string, size float64, col rgb, indent float64) {
	l.font(fontSans, style, size)
	for _, line := range l.wrap(s, l.right-l.left-indent, 0) {
		l.ensure(lineH(size))
		l.font(fontSans, style, size) // a new page's header changes the font
		l.ink(col)
		l.text(l.left+indent, l.y, size, line)
		l.y += lineH(size)
	}
}

// boxNote is a line of small type under a verdict: bullet marks the first
// line of an item, indent shifts the text right of the bullet.
type boxNote struct {
	text   string
	bullet bool
	indent float64
}

// verdictBox draws the verdict on its fill with a bar of its ink at the
// left: the head lines in bold big type, then the notes in small type.
func (l *layout) verdictBox(head []string, big float64, notes []boxNote, small float64, ink, fill rgb) {
	h := float64(len(head))*lineH(big) + float64(len(notes))*lineH(small) + 6
	if len(notes) > 0 {
		h += 1.5
	}
	l.y += 4
	l.ensure(h)
	l.doc.SetFillColor(fill.r, fill.g, fill.b)
	l.doc.Rect(l.left, l.y, l.right-l.left, h, "F")
	l.doc.SetFillColor(ink.r, ink.g, ink.b)
	l.doc.Rect(l.left, l.y, 1.8, h, "F")
	y := l.y + 3
	l.font(fontSans, "B", big)
	l.ink(ink)
	for _, s := range head {
		l.text(l.left+5, y, big, s)
		y += lineH(big)
	}
	y += 1.5
	l.font(fontSans, "", small)
	l.ink(black)
	for _, n := range notes {
		if n.bullet {
			l.text(l.left+5, y, small, "•")
		}
		l.text(l.left+5+n.indent, y, small, n.text)
		y += lineH(small)
	}
	l.y += h
}

// signatures draws a name, signature and date line for each of the
// report's signature roles.
func (l *layout) signatures() {
	roles := l.report.Signatures
	if len(roles) == 0 {
		return
	}
	const rowH = 15.0
	l.section("Review and release", rowH)
	w := l.right - l.left
	roleW := 0.30 * w
	fields := []struct {
		label string
		share float64
	}{{"Name", 0.27}, {"Signature", 0.25}, {"Date", 0.14}}
	for _, role := range roles {
		l.ensure(rowH)
		l.font(fontSans, "B", 8.5)
		l.ink(black)
		lines := l.wrap(role, roleW-3, 2)
		for k, s := range lines { // the last line sits on the signature lines
			l.text(l.left, l.y+10-float64(len(lines)-k)*lineH(8.5), 8.5, s)
		}
		x := l.left + roleW
		for _, f := range fields {
			fw := f.share * w
			l.doc.SetDrawColor(grey.r, grey.g, grey.b)
			l.doc.SetLineWidth(0.25)
			l.doc.Line(x, l.y+10, x+fw-4, l.y+10)
			l.font(fontSans, "", 6.5)
			l.ink(grey)
			l.text(x, l.y+10.6, 6.5, f.label)
			x += fw
		}
		l.y += rowH
	}
}

// cautions lists the cautions, numbered: the default ones always, then the
// report's own.
func (l *layout) cautions() {
	list := slices.Clone(l.report.Cautions)
	for i := len(pipeline.DefaultCautions) - 1; i >= 0; i-- {
		if d := pipeline.DefaultCautions[i]; !slices.Contains(list, d) {
			list = slices.Insert(list, 0, d)
		}
	}
	l.section("Cautions", 3*lineH(8))
	for i, s := range list {
		l.font(fontSans, "", 8)
		for k, line := range l.wrap(s, l.right-l.left-6, 0) {
			l.ensure(lineH(8))
			l.font(fontSans, "", 8)
			l.ink(black)
			if k == 0 {
				l.text(l.left, l.y, 8, strconv.Itoa(i+1)+".")
			}
			l.text(l.left+6, l.y, 8, line)
			l.y += lineH(8)
		}
		l.y += 0.8
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

// table lays out rows across the body, under a heading row (when header
// is set) that is repeated on every page the table reaches. Cells wrap to
// at most maxLines lines.
type table struct {
	l        *layout
	cols     []column
	widths   []float64
	size     float64
	maxLines int
	title    string // shown above the heading row on continuation pages
	header   bool
}

func (l *layout) newTable(title string, size float64, maxLines int, header bool, cols ...column) *table {
	t := &table{l: l, cols: cols, size: size, maxLines: maxLines, title: title, header: header}
	total := 0.0
	for _, col := range cols {
		total += col.share
	}
	for _, col := range cols {
		t.widths = append(t.widths, col.share/total*(l.right-l.left))
	}
	return t
}

// layout wraps the cells of a row and returns the lines and the row's height.
func (t *table) layout(cells []cell) ([][]string, float64) {
	lines := make([][]string, len(cells))
	n := 1
	for i, cl := range cells {
		t.setFont(cl)
		lines[i] = t.l.wrap(cl.text, t.widths[i]-2*pad-t.cols[i].inset, t.maxLines)
		n = max(n, len(lines[i]))
	}
	return lines, float64(n)*lineH(t.size) + 2*pad
}

func (t *table) setFont(cl cell) {
	switch {
	case cl.mono:
		t.l.font(fontMono, "", t.size)
	case cl.bold:
		t.l.font(fontSans, "B", t.size)
	default:
		t.l.font(fontSans, "", t.size)
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
		t.l.ensure(first)
		return
	}
	lines, h := t.layout(t.headCells())
	t.l.ensure(h + first)
	t.draw(t.headCells(), lines, h, &headFill)
}

// row draws a row, continuing the table on a new page when it does not fit.
func (t *table) row(cells ...cell) { t.filledRow(cells, nil) }

// filledRow draws a row on a background colour (nil: none).
func (t *table) filledRow(cells []cell, fill *rgb) {
	lines, h := t.layout(cells)
	if t.l.ensure(h) {
		if t.title != "" {
			t.l.font(fontSans, "B", 8.5)
			t.l.ink(grey)
			t.l.text(t.l.left, t.l.y, 8.5, clean(t.title)+" (continued)")
			t.l.y += lineH(8.5) + 1
		}
		t.start(h)
	}
	t.draw(cells, lines, h, fill)
}

func (t *table) draw(cells []cell, lines [][]string, h float64, fill *rgb) {
	l := t.l
	if fill != nil {
		l.doc.SetFillColor(fill.r, fill.g, fill.b)
		l.doc.Rect(l.left, l.y, l.right-l.left, h, "F")
	}
	x := l.left
	for i, cl := range cells {
		t.setFont(cl)
		l.ink(black)
		if cl.color != nil {
			l.ink(*cl.color)
		}
		for k, s := range lines[i] {
			top := l.y + pad + float64(k)*lineH(t.size)
			if t.cols[i].right {
				l.textRight(x+t.widths[i]-pad, top, t.size, s)
			} else {
				l.text(x+pad+t.cols[i].inset, top, t.size, s)
			}
		}
		x += t.widths[i]
	}
	l.y += h
	l.doc.SetDrawColor(ruleGrey.r, ruleGrey.g, ruleGrey.b)
	l.doc.SetLineWidth(0.15)
	l.doc.Line(l.left, l.y, l.right, l.y)
}

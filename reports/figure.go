package reports

import (
	"bytes"
	"cmp"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"image"
	"image/color"
	"image/png"
	"math"
	"slices"
	"strconv"
	"strings"

	"codeberg.org/go-pdf/fpdf"
	stdfont "golang.org/x/image/font"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/font"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/text"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"lotgate/pipeline"
)

// minMaxColumns returns the indices of the samples of y to draw on a plot
// that is columns pixel columns wide: y is cut into columns runs of
// consecutive samples (one per pixel column) and, of each run, the smallest
// and the largest finite sample are kept, in time order. A line through the
// kept samples covers exactly the pixels the full line would, so a peak one
// sample wide is never lost. When y has no more than 2·columns samples, every
// finite sample is kept. Non-finite samples are dropped.
func minMaxColumns(y []float64, columns int) []int {
	n := len(y)
	columns = max(columns, 1)
	if n <= 2*columns {
		out := make([]int, 0, n)
		for i, v := range y {
			if finite(v) {
				out = append(out, i)
			}
		}
		return out
	}
	out := make([]int, 0, 2*columns)
	for c := range columns {
		lo, hi := c*n/columns, (c+1)*n/columns
		imin, imax := -1, -1
		for i := lo; i < hi; i++ {
			v := y[i]
			if !finite(v) {
				continue
			}
			if imin < 0 || v < y[imin] {
				imin = i
			}
			if imax < 0 || v > y[imax] {
				imax = i
			}
		}
		switch {
		case imin < 0:
		case imin == imax:
			out = append(out, imin)
		case imin < imax:
			out = append(out, imin, imax)
		default:
			out = append(out, imax, imin)
		}
	}
	return out
}

func finite(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }

// panelSpec is one panel of the chromatogram figure: samples [from, to) of
// the trace, drawn with y from ymin to ymax, and the peaks labelled at their
// apexes.
type panelSpec struct {
	title      string
	from, to   int
	ymin, ymax float64
	labels     []apexLabel
}

// apexLabel names a peak at its apex (data coordinates).
type apexLabel struct {
	x, y   float64
	text   string
	named  bool    // an identified component (an unknown shows its number)
	height float64 // the peak's height, for the order of placement
}

// traceSignal returns the signal the certificate draws: the processed one,
// or the raw one when the record has no processed signal.
func traceSignal(tr *pipeline.TraceRec) []float64 {
	if len(tr.Processed) > 0 {
		return tr.Processed
	}
	return tr.Raw
}

// figurePanels decides what the chromatogram figure shows: the whole run at
// full scale and, when the full scale hides the small peaks, a second panel
// on the peaks' time range with y limited to 1.5 × the height of the tallest
// peak other than the main one, so trace impurities can be seen beside a
// 99.9 % main peak. With no such peak (a blank, a pure main peak) the second
// panel shows the whole run with y limited to 25 × the noise's peak-to-peak
// amplitude. It returns nothing when the record has no trace to draw.
func figurePanels(rec *pipeline.Record) []panelSpec {
	tr := rec.Trace
	if tr == nil {
		return nil
	}
	sig := traceSignal(tr)
	n := len(sig)
	if n < 2 || !(tr.IntervalMin > 0) || !finite(tr.StartMin) || !finite(tr.IntervalMin*float64(n)) {
		return nil
	}
	at := func(t float64) int { // nearest sample to time t, clamped
		i := math.Round((t - tr.StartMin) / tr.IntervalMin)
		return int(min(max(i, 0), float64(n-1)))
	}
	lo, hi := finiteRange(sig, 0, n)
	if blo, bhi := finiteRange(tr.Baseline, 0, min(n, len(tr.Baseline))); blo <= bhi {
		lo, hi = min(lo, blo), max(hi, bhi)
	}
	if lo > hi { // nothing finite to draw
		return nil
	}
	if hi == lo {
		lo, hi = lo-1, hi+1
	}
	labels := make([]apexLabel, 0, len(rec.Peaks))
	for _, p := range rec.Peaks {
		if !finite(p.RTMin) {
			continue
		}
		l := apexLabel{x: p.RTMin, y: sig[at(p.RTMin)], text: strconv.Itoa(p.Number), height: p.Height}
		if p.Component != "" {
			l.text, l.named = shortLabel(clean(p.Component)), true
		}
		labels = append(labels, l)
	}
	if lo > 0 && lo < 0.5*hi { // a positive signal is drawn from zero
		lo = 0
	}
	full := panelSpec{from: 0, to: n, ymin: lo, ymax: hi + 0.04*(hi-lo), labels: labels}

	main := mainPeak(rec)
	tallest := -1 // the tallest peak other than the main one
	for i, p := range rec.Peaks {
		if i != main && (tallest < 0 || p.Height > rec.Peaks[tallest].Height) {
			tallest = i
		}
	}
	from, to := 0, n
	var extent float64
	var what string
	switch {
	case tallest >= 0 && rec.Peaks[tallest].Height > 0 && finite(rec.Peaks[tallest].Height):
		extent = 1.5 * rec.Peaks[tallest].Height
		what = "1.5 × the tallest peak other than the main one"
		first, last := math.Inf(1), math.Inf(-1)
		for _, p := range rec.Peaks {
			if finite(p.StartMin) && finite(p.EndMin) {
				first, last = min(first, p.StartMin), max(last, p.EndMin)
			}
		}
		if first > last {
			return []panelSpec{full}
		}
		margin := 0.04 * float64(n-1) * tr.IntervalMin
		from, to = at(first-margin), at(last+margin)+1
	case rec.Noise != nil && rec.Noise.PeakToPeak > 0:
		extent = 25 * rec.Noise.PeakToPeak
		what = "25 × the noise (peak to peak)"
	default:
		return []panelSpec{full}
	}
	// A second panel only helps when the full scale hides the small peaks.
	if full.ymax-full.ymin < 10*extent || to-from < 2 {
		return []panelSpec{full}
	}
	// Only peaks that stand out at full scale are labelled there.
	var big []apexLabel
	for _, l := range labels {
		if l.height >= 0.03*(full.ymax-full.ymin) {
			big = append(big, l)
		}
	}
	full.labels = big
	full.title = "Full scale"
	base0, base1 := finiteRange(tr.Baseline, from, min(to, len(tr.Baseline)))
	if base0 > base1 { // no baseline: the signal's floor stands in for it
		base0, _ = finiteRange(sig, from, to)
		base1 = base0
	}
	zoom := panelSpec{
		title: "Expanded: y up to " + what,
		from:  from, to: to,
		ymin: base0 - 0.1*extent, ymax: base1 + extent,
		labels: labels,
	}
	return []panelSpec{full, zoom}
}

// maxLabel is the longest label, in characters, drawn in the figure: a
// longer name would squeeze the plot (the peaks table has it whole).
const maxLabel = 18

// shortLabel cuts s to maxLabel characters, ending in an ellipsis.
func shortLabel(s string) string {
	r := []rune(s)
	if len(r) <= maxLabel {
		return s
	}
	return strings.TrimSpace(string(r[:maxLabel-1])) + "…"
}

// mainPeak returns the index of the main component's peak, else of the
// tallest peak; -1 when there are no peaks.
func mainPeak(rec *pipeline.Record) int {
	for _, c := range rec.Components {
		if c.Main && c.Peak != nil && *c.Peak >= 1 && *c.Peak <= len(rec.Peaks) {
			return *c.Peak - 1
		}
	}
	best := -1
	for i, p := range rec.Peaks {
		if best < 0 || p.Height > rec.Peaks[best].Height {
			best = i
		}
	}
	return best
}

// finiteRange returns the smallest and largest finite values of y[from:to];
// lo > hi when there are none.
func finiteRange(y []float64, from, to int) (lo, hi float64) {
	lo, hi = math.Inf(1), math.Inf(-1)
	from = min(max(from, 0), len(y))
	for _, v := range y[from:max(min(to, len(y)), from)] {
		if finite(v) {
			lo, hi = min(lo, v), max(hi, v)
		}
	}
	return lo, hi
}

// Colours of the figure.
var (
	signalColor   = color.RGBA{R: 0x1f, G: 0x3a, B: 0x6e, A: 0xff}
	baselineColor = color.RGBA{R: 0xc0, G: 0x39, B: 0x2b, A: 0xff}
	gridColor     = color.RGBA{R: 0xdd, G: 0xdd, B: 0xdd, A: 0xff}
	unknownColor  = color.RGBA{R: 0x66, G: 0x66, B: 0x66, A: 0xff}
)

// plotSans is the plot's typeface: the Liberation Sans the document embeds.
var plotSans = font.Font{Typeface: "Liberation", Variant: "Sans"}

// figureDPI is the resolution the trace is decimated to: print quality.
const figureDPI = 300

// drawPanel draws one panel of the chromatogram into the box (x, y, w, h),
// in millimetres from the page's top-left corner. Nothing is drawn outside
// the box.
func drawPanel(doc *fpdf.Fpdf, rec *pipeline.Record, spec panelSpec, x, y, w, h float64) {
	p := panelPlot(rec, spec, w)
	doc.ClipRect(x, y, w, h, false)
	drawPlot(doc, p, x, y, w, h)
	doc.ClipEnd()
}

// drawPlot draws p into the box (x, y, w, h), in millimetres from the
// page's top-left corner.
func drawPlot(doc *fpdf.Fpdf, p *plot.Plot, x, y, w, h float64) {
	c := newPDFCanvas(doc, x, y, w, h)
	p.Draw(draw.New(c))
	c.close()
}

// newPlot makes a plot in the documents' style: Liberation Sans in black,
// thin axes with niceTicks, and a light grid. The axis labels are cleaned
// for the fonts; titlePad is the space under the title, in points.
func newPlot(title string, titlePad float64, xLabel, yLabel string) *plot.Plot {
	p := plot.New()
	style := func(s *text.Style, size float64) {
		s.Font = font.From(plotSans, vg.Points(size))
		s.Color = color.Black
	}
	style(&p.Title.TextStyle, 7.5)
	style(&p.X.Label.TextStyle, 7.5)
	style(&p.Y.Label.TextStyle, 7.5)
	style(&p.X.Tick.Label, 6.5)
	style(&p.Y.Tick.Label, 6.5)
	p.Title.Text, p.Title.Padding = title, vg.Points(titlePad)
	p.X.Label.Text, p.Y.Label.Text = clean(xLabel), clean(yLabel)
	for _, ax := range []*plot.Axis{&p.X, &p.Y} {
		ax.Tick.Marker = niceTicks{}
		ax.Width = vg.Points(0.5)
		ax.Tick.Width = vg.Points(0.5)
		ax.Padding = 0
	}
	grid := plotter.NewGrid()
	grid.Vertical.Color, grid.Horizontal.Color = gridColor, gridColor
	grid.Vertical.Width, grid.Horizontal.Width = vg.Points(0.3), vg.Points(0.3)
	p.Add(grid)
	return p
}

// panelPlot builds the plot of one panel, w millimetres wide.
func panelPlot(rec *pipeline.Record, spec panelSpec, w float64) *plot.Plot {
	tr := rec.Trace
	sig := traceSignal(tr)
	p := newPlot(spec.title, 4, "Time ("+nonEmpty(rec.Units.Time, "min")+")",
		"Signal ("+nonEmpty(rec.Units.Signal, "signal units")+")")

	columns := int(math.Ceil(w / 25.4 * figureDPI))
	line := func(v []float64, c color.Color, dashes []vg.Length) traceLine {
		to := min(spec.to, len(v))
		from := min(spec.from, to)
		idx := minMaxColumns(v[from:to], columns)
		xys := make(plotter.XYs, len(idx))
		for k, i := range idx {
			i += from
			xys[k] = plotter.XY{X: tr.StartMin + float64(i)*tr.IntervalMin, Y: v[i]}
		}
		return traceLine{&plotter.Line{XYs: xys, LineStyle: draw.LineStyle{Color: c, Width: vg.Points(0.45), Dashes: dashes}}}
	}
	p.Add(line(sig, signalColor, nil))
	if len(tr.Baseline) > 0 {
		p.Add(line(tr.Baseline, baselineColor, []vg.Length{vg.Points(2), vg.Points(1.2)}))
	}
	p.X.Min = tr.StartMin + float64(spec.from)*tr.IntervalMin
	p.X.Max = tr.StartMin + float64(spec.to-1)*tr.IntervalMin
	p.Y.Min, p.Y.Max = spec.ymin, spec.ymax
	p.Add(newApexLabels(spec.labels, p.X.Min, p.X.Max, p.Y.Min, p.Y.Max))
	return p
}

// niceTicks is a plot.Ticker with about six major ticks a step of 1, 2 or
// 5 × 10ⁿ apart, labelled with the decimals the step needs, and minor ticks
// between them.
type niceTicks struct{}

// Ticks implements plot.Ticker.
func (niceTicks) Ticks(lo, hi float64) []plot.Tick {
	if !(hi > lo) || math.IsInf(hi-lo, 0) {
		return nil
	}
	raw := (hi - lo) / 6
	mag := math.Pow(10, math.Floor(math.Log10(raw)))
	mult, minors := 10.0, 5.0
	for _, m := range []struct{ step, minors float64 }{{1, 5}, {2, 4}, {5, 5}} {
		if m.step*mag >= raw*(1-1e-9) { // 30.000000000000004 still gets steps of 5
			mult, minors = m.step, m.minors
			break
		}
	}
	step := mult * mag
	decimals := max(0, -int(math.Floor(math.Log10(step)+1e-9)))
	minor := step / minors
	var ticks []plot.Tick
	for k := math.Ceil(lo/minor - 1e-9); k <= math.Floor(hi/minor+1e-9); k++ {
		v := min(max(k*minor, lo), hi) + 0 // + 0 turns -0 into 0
		t := plot.Tick{Value: v}
		if math.Mod(k, minors) == 0 {
			t.Label = strconv.FormatFloat(v, 'f', decimals, 64)
		}
		ticks = append(ticks, t)
	}
	return ticks
}

// traceLine draws a plotter.Line without reporting a glyph box per point,
// which the plot would otherwise gather again and again for thousands of
// points that have no glyphs.
type traceLine struct{ line *plotter.Line }

// Plot implements plot.Plotter.
func (t traceLine) Plot(c draw.Canvas, p *plot.Plot) { t.line.Plot(c, p) }

func nonEmpty(s, def string) string {
	if s == "" {
		return def
	}
	return s
}

// apexLabels is a plotter that names peaks at their apexes: identified
// components with their names written upwards, unknowns with their peak
// number. Names go first, taller peaks before smaller ones; a label that
// would overlap one already placed is left out (every peak is listed in the
// peaks table). A named peak whose apex is above the plot is named at the
// top edge, "(off scale)".
type apexLabels struct {
	labels []placedLabel
}

// placedLabel is a label with its anchor in data coordinates, its text
// style, the offset from the anchor to the text's alignment point, and the
// text's extent about the anchor.
type placedLabel struct {
	x, y  float64
	text  string
	style text.Style
	off   vg.Point
	rect  vg.Rectangle
}

// labelGap lifts a label off its apex.
const labelGap = vg.Length(2)

func newApexLabels(all []apexLabel, xmin, xmax, ymin, ymax float64) *apexLabels {
	var shown []apexLabel
	for _, a := range all {
		if a.x >= xmin && a.x <= xmax && a.y >= ymin && (a.y <= ymax || a.named) {
			shown = append(shown, a)
		}
	}
	slices.SortStableFunc(shown, func(a, b apexLabel) int {
		if a.named != b.named {
			if a.named {
				return -1
			}
			return 1
		}
		return cmp.Compare(b.height, a.height)
	})
	named := text.Style{Color: color.Black, Font: font.From(plotSans, vg.Points(6.5)), Rotation: math.Pi / 2,
		XAlign: draw.XLeft, YAlign: draw.YCenter, Handler: plot.DefaultTextHandler}
	number := text.Style{Color: unknownColor, Font: font.From(plotSans, vg.Points(5.5)),
		XAlign: draw.XCenter, YAlign: draw.YBottom, Handler: plot.DefaultTextHandler}
	l := &apexLabels{}
	for _, a := range shown {
		pl := placedLabel{x: a.x, y: a.y, text: a.text, style: number, off: vg.Point{Y: labelGap}}
		switch {
		case a.y > ymax:
			pl.y, pl.text = ymax, a.text+" (off scale)"
			pl.style = text.Style{Color: color.Black, Font: named.Font, XAlign: draw.XLeft, YAlign: draw.YTop,
				Handler: plot.DefaultTextHandler}
			pl.off = vg.Point{X: 3, Y: -1.5}
			if a.x > xmin+0.7*(xmax-xmin) { // keep it inside the plot: write it leftwards
				pl.style.XAlign, pl.off.X = draw.XRight, -3
			}
		case a.named:
			pl.style = named
		}
		r := pl.style.Rectangle(pl.text)
		pl.rect = vg.Rectangle{Min: r.Min.Add(pl.off), Max: r.Max.Add(pl.off)}
		l.labels = append(l.labels, pl)
	}
	return l
}

// Plot implements plot.Plotter.
func (l *apexLabels) Plot(c draw.Canvas, p *plot.Plot) {
	trX, trY := p.Transforms(&c)
	var taken []vg.Rectangle
	const room = 0.5 // points kept clear around a label
	for _, a := range l.labels {
		pt := vg.Point{X: trX(a.x), Y: trY(a.y)}
		r := vg.Rectangle{Min: a.rect.Min.Add(pt), Max: a.rect.Max.Add(pt)}
		if slices.ContainsFunc(taken, func(t vg.Rectangle) bool {
			return r.Min.X < t.Max.X+room && t.Min.X < r.Max.X+room && r.Min.Y < t.Max.Y+room && t.Min.Y < r.Max.Y+room
		}) {
			continue
		}
		taken = append(taken, r)
		c.FillText(a.style, pt.Add(a.off), a.text)
	}
}

// GlyphBoxes implements plot.GlyphBoxer, so that the plot leaves room for
// the labels.
func (l *apexLabels) GlyphBoxes(p *plot.Plot) []plot.GlyphBox {
	out := make([]plot.GlyphBox, len(l.labels))
	for i, a := range l.labels {
		out[i] = plot.GlyphBox{X: p.X.Norm(a.x), Y: p.Y.Norm(a.y), Rectangle: a.rect}
	}
	return out
}

// pdfCanvas is a vg.Canvas that draws into a box of an fpdf page, so that
// the figure is vector graphics in the certificate itself. Its fonts are the
// document's embedded Liberation fonts, which are the ones the plot measures
// text with.
type pdfCanvas struct {
	doc    *fpdf.Fpdf
	w, h   vg.Length
	widths []vg.Length // line width per Push level
}

// mmPerPoint converts the plot's points to the document's millimetres.
const mmPerPoint = 25.4 / 72

func newPDFCanvas(doc *fpdf.Fpdf, x, y, w, h float64) *pdfCanvas {
	c := &pdfCanvas{doc: doc, w: vg.Length(w / mmPerPoint), h: vg.Length(h / mmPerPoint), widths: []vg.Length{1}}
	// The plot's origin is the box's bottom-left corner with y upwards.
	doc.TransformBegin()
	doc.TransformTranslate(x, y+h)
	doc.TransformScale(100, -100, 0, 0)
	vg.Initialize(c)
	return c
}

// close ends the canvas's transformation.
func (c *pdfCanvas) close() { c.doc.TransformEnd() }

func mm(l vg.Length) float64 { return float64(l) * mmPerPoint }

// Size implements vg.CanvasSizer.
func (c *pdfCanvas) Size() (w, h vg.Length) { return c.w, c.h }

// SetLineWidth implements vg.Canvas.
func (c *pdfCanvas) SetLineWidth(w vg.Length) {
	c.widths[len(c.widths)-1] = w
	c.doc.SetLineWidth(mm(max(w, 0)))
}

// SetLineDash implements vg.Canvas.
func (c *pdfCanvas) SetLineDash(dashes []vg.Length, offs vg.Length) {
	ds := make([]float64, len(dashes))
	for i, d := range dashes {
		ds[i] = mm(d)
	}
	c.doc.SetDashPattern(ds, mm(offs))
}

// SetColor implements vg.Canvas.
func (c *pdfCanvas) SetColor(clr color.Color) {
	if clr == nil {
		clr = color.Black
	}
	r, g, b, _ := clr.RGBA()
	c.doc.SetDrawColor(int(r>>8), int(g>>8), int(b>>8))
	c.doc.SetFillColor(int(r>>8), int(g>>8), int(b>>8))
	c.doc.SetTextColor(int(r>>8), int(g>>8), int(b>>8))
}

// Rotate implements vg.Canvas.
func (c *pdfCanvas) Rotate(rad float64) { c.doc.TransformRotate(-rad*180/math.Pi, 0, 0) }

// Translate implements vg.Canvas.
func (c *pdfCanvas) Translate(pt vg.Point) { c.doc.TransformTranslate(mm(pt.X), mm(pt.Y)) }

// Scale implements vg.Canvas.
func (c *pdfCanvas) Scale(x, y float64) { c.doc.TransformScale(x*100, y*100, 0, 0) }

// Push implements vg.Canvas.
func (c *pdfCanvas) Push() {
	c.widths = append(c.widths, c.widths[len(c.widths)-1])
	c.doc.TransformBegin()
}

// Pop implements vg.Canvas.
func (c *pdfCanvas) Pop() {
	c.doc.TransformEnd()
	c.widths = c.widths[:len(c.widths)-1]
}

// Stroke implements vg.Canvas.
func (c *pdfCanvas) Stroke(p vg.Path) {
	if c.widths[len(c.widths)-1] > 0 {
		c.path(p, "D")
	}
}

// Fill implements vg.Canvas.
func (c *pdfCanvas) Fill(p vg.Path) { c.path(p, "F") }

func (c *pdfCanvas) path(p vg.Path, style string) {
	var x0, y0 float64
	for _, comp := range p {
		switch comp.Type {
		case vg.MoveComp:
			x0, y0 = mm(comp.Pos.X), mm(comp.Pos.Y)
			c.doc.MoveTo(x0, y0)
		case vg.LineComp:
			c.doc.LineTo(mm(comp.Pos.X), mm(comp.Pos.Y))
		case vg.ArcComp:
			// Line segments of at most π/32 each: finer than print can show.
			steps := max(int(math.Ceil(math.Abs(comp.Angle)/(math.Pi/32))), 1)
			for k := 0; k <= steps; k++ {
				a := comp.Start + comp.Angle*float64(k)/float64(steps)
				c.doc.LineTo(mm(comp.Pos.X+comp.Radius*vg.Length(math.Cos(a))),
					mm(comp.Pos.Y+comp.Radius*vg.Length(math.Sin(a))))
			}
		case vg.CurveComp:
			px, py := mm(comp.Pos.X), mm(comp.Pos.Y)
			switch len(comp.Control) {
			case 1:
				c.doc.CurveTo(mm(comp.Control[0].X), mm(comp.Control[0].Y), px, py)
			case 2:
				c.doc.CurveBezierCubicTo(mm(comp.Control[0].X), mm(comp.Control[0].Y),
					mm(comp.Control[1].X), mm(comp.Control[1].Y), px, py)
			}
		case vg.CloseComp:
			c.doc.LineTo(x0, y0)
			c.doc.ClosePath()
		}
	}
	c.doc.DrawPath(style)
}

// FillString implements vg.Canvas: text with its baseline's left end at pt.
func (c *pdfCanvas) FillString(f font.Face, pt vg.Point, s string) {
	if f.Font.Size == 0 {
		return
	}
	family := fontSans
	if f.Font.Variant == "Mono" {
		family = fontMono
	}
	style := ""
	if f.Font.Weight >= stdfont.WeightBold {
		style = "B"
	}
	c.doc.SetFont(family, style, f.Font.Size.Points())
	c.Push()
	c.Translate(pt)
	c.Scale(1, -1) // text is upright in the page's own orientation
	c.doc.Text(0, 0, clean(s))
	c.Pop()
}

// DrawImage implements vg.Canvas.
func (c *pdfCanvas) DrawImage(rect vg.Rectangle, img image.Image) {
	var buf bytes.Buffer
	if err := png.Encode(&buf, img); err != nil {
		c.doc.SetError(fmt.Errorf("figure image: %w", err))
		return
	}
	sum := sha256.Sum256(buf.Bytes())
	name := "figure-image-" + hex.EncodeToString(sum[:])
	opts := fpdf.ImageOptions{ImageType: "PNG"}
	c.doc.RegisterImageOptionsReader(name, opts, &buf)
	// The canvas is flipped: draw from the top edge, upside down again.
	c.Push()
	c.Translate(vg.Point{X: rect.Min.X, Y: rect.Max.Y})
	c.Scale(1, -1)
	c.doc.ImageOptions(name, 0, 0, mm(rect.Size().X), mm(rect.Size().Y), false, opts, 0, "")
	c.Pop()
}

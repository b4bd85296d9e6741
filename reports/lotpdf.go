package reports

import (
	"errors"
	"fmt"
	"image/color"
	"io"
	"math"
	"slices"
	"strconv"
	"strings"

	"codeberg.org/go-pdf/fpdf"
	"gonum.org/v1/plot"
	"gonum.org/v1/plot/plotter"
	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"

	"lotgate/pipeline"
	"lotgate/pipeline/batch"
	"lotgate/rules"
)

// WriteLotPDF renders a lot record as the lot summary: the verdict with its
// reasons, each sample's results over its replicates, the system-suitability
// gates, each calibration with its plot and points, the sequence with every
// injection's status, the provenance with the lot record's own SHA-256,
// signature lines and the cautions. A released lot's summary is its lot
// certificate of analysis; any other verdict says that no certificate is
// issued. logo may be nil. The document shows what the record holds and
// computes nothing; the same record and logo give the same bytes.
func WriteLotPDF(w io.Writer, lot *batch.Lot, logo []byte) error {
	if lot == nil {
		return errors.New("lot pdf: no lot record to render")
	}
	d, err := newLotDoc(lot, logo)
	if err != nil {
		return fmt.Errorf("lot pdf: %w", err)
	}
	d.render()
	if err := d.doc.Output(w); err != nil {
		return fmt.Errorf("lot pdf: %w", err)
	}
	return nil
}

// lotDoc is a lot summary being laid out, in the certificate's style.
type lotDoc struct {
	*layout
	lot    *batch.Lot
	digest string // SHA-256 of the lot record's JSON bytes
}

func newLotDoc(lot *batch.Lot, logo []byte) (*lotDoc, error) {
	l, err := newLayout(lot.Report, lot.Provenance.ProcessedAt, lot.Provenance.Tool+" "+lot.Provenance.Version,
		lotTitle(lot)+" — lot "+nonEmpty(lot.Lot, "—"), headline{text: lotTitle(lot), size: 13, lines: 2}, logo)
	if err != nil {
		return nil, err
	}
	digest, err := lotDigest(lot)
	if err != nil {
		return nil, err
	}
	return &lotDoc{layout: l, lot: lot, digest: digest}, nil
}

// lotTitle is the document's title: a certificate only for a released lot.
func lotTitle(lot *batch.Lot) string {
	if lot.Verdict == batch.Released {
		return "Lot certificate of analysis"
	}
	return "Lot summary — no certificate"
}

func (d *lotDoc) render() {
	d.newPage()
	d.lotBlock()
	d.verdictBlock()
	d.results()
	d.suitability()
	d.calibration()
	d.sequence()
	d.warnings()
	d.provenance()
	d.signatures()
	d.cautions()
	d.footers("Lot "+nonEmpty(d.lot.Lot, "—")+" · sequence "+nonEmpty(d.lot.Sequence.Name, "—")+
		" · lot record SHA-256 "+d.digest[:16]+"…", false)
}

// subheading writes a bold line inside a section.
func (d *lotDoc) subheading(s string, keep float64) {
	const size = 9
	d.y += 1.5
	d.ensure(lineH(size) + keep)
	d.font(fontSans, "B", size)
	d.ink(black)
	d.text(d.left, d.y, size, d.wrap(s, d.right-d.left, 1)[0])
	d.y += lineH(size) + 0.8
}

// lotBlock says which lot, sequence and method the summary is about.
func (d *lotDoc) lotBlock() {
	l := d.lot
	items := [][2]string{
		{"Lot", nonEmpty(l.Lot, "—")},
		{"Samples", strconv.Itoa(len(l.Samples))},
		{"Sequence", nonEmpty(l.Sequence.Name, "—") + " (" + xlPlural(l.Sequence.Injections, "injection") + ")"},
		{"Sequence file", nonEmpty(l.Provenance.SequenceFile, "—")},
		{"Method", nonEmpty(l.Method.Name, "—") + ", revision " + strconv.Itoa(l.Method.Revision)},
		{"Processed", nonEmpty(l.Provenance.ProcessedAt, "—")},
	}
	if l.Sequence.Description != "" {
		items = append(items, [2]string{"Description", l.Sequence.Description}, [2]string{"", ""})
	}
	d.section("Lot", 10)
	t := d.newTable("", 8.5, 3, false, column{share: 17}, column{share: 33}, column{share: 17}, column{share: 33})
	for i := 0; i < len(items); i += 2 {
		t.row(cell{text: items[i][0], color: &grey}, cell{text: items[i][1], bold: true},
			cell{text: items[i+1][0], color: &grey}, cell{text: items[i+1][1], bold: true})
	}
}

// verdictWords states the lot verdict and its colours.
func verdictWords(lot *batch.Lot) (string, rgb, rgb) {
	who := "Lot " + nonEmpty(lot.Lot, "—")
	switch lot.Verdict {
	case batch.Released:
		return who + " RELEASED: every result conforms to the specification", passInk, passFill
	case batch.Rejected:
		return who + " REJECTED: a result does not conform to the specification", failInk, failFill
	case batch.InvalidRun:
		return "INVALID RUN: the results of lot " + nonEmpty(lot.Lot, "—") + " may not be used and no certificate is issued", undetInk, undetFill
	}
	return who + " NOT RELEASED: a result could not be determined", undetInk, undetFill
}

// verdictBlock states the verdict in large type with its reasons.
func (d *lotDoc) verdictBlock() {
	words, inkCol, fill := verdictWords(d.lot)
	const big, small = 14.0, 8.5
	inner := d.right - d.left - 8
	d.font(fontSans, "B", big)
	head := d.wrap(words, inner, 3)
	d.font(fontSans, "", small)
	var notes []boxNote
	for _, r := range d.lot.Reasons {
		for _, line := range d.wrap("• "+r, inner, 4) {
			notes = append(notes, boxNote{text: line})
		}
	}
	d.verdictBox(head, big, notes, small, inkCol, fill)
}

// conformityOf words a result's status, with invalid samples' results
// marked as such whatever they are.
func conformityOf(status string, invalid bool) (string, *rgb) {
	if invalid {
		return "invalid run", &undetInk
	}
	return conformity(status)
}

// results lists each sample's results over its replicates.
func (d *lotDoc) results() {
	d.section("Results", 14)
	if len(d.lot.Samples) == 0 {
		d.paragraph("The lot has no sample.", "", 8.5, black, 0)
		return
	}
	for _, s := range d.lot.Samples {
		title := "Sample " + s.Sample + " (injections " + joinInts(s.Injections) + ")"
		d.subheading(title, 12)
		if s.Status == batch.StatusInvalid {
			d.paragraph("Invalid: "+strings.Join(s.Reasons, "; ")+".", "", 8, undetInk, 0)
		}
		if len(s.Results) == 0 {
			d.paragraph("No specification limit applies to this sample.", "I", 8, grey, 0)
			continue
		}
		t := d.newTable(title, 8, 3, true,
			column{head: "Test", share: 28}, column{head: "Replicates", share: 31},
			column{head: "Result", share: 13, right: true}, column{head: "RSD %", share: 10, right: true},
			column{head: "Specification", share: 21, inset: 3}, column{head: "Unit", share: 28},
			column{head: "Conformity", share: 19})
		t.start(7)
		for _, r := range s.Results {
			word, col := conformityOf(r.Status, s.Status == batch.StatusInvalid)
			rsd := "—"
			if r.RSD != nil {
				rsd = fixed(*r.RSD, 2)
			}
			t.row(cell{text: r.Name}, cell{text: replicateText(r)}, cell{text: nonEmpty(r.Reported, "—"), bold: true},
				cell{text: rsd}, cell{text: specification(pipeline.LimitRec{Min: r.Min, Max: r.Max})},
				cell{text: nonEmpty(r.Unit, "—")}, cell{text: word, bold: r.Status != rules.Pass, color: col})
		}
		for _, r := range s.Results {
			if r.Status != rules.Pass && r.Reason != "" {
				d.paragraph("• "+r.Name+": "+r.Reason, "", 7.5, black, 2)
			}
		}
	}
	d.y += 1
	d.paragraph("Each result is the mean of its replicates, reported to the decimals of its specification and "+
		"compared with it after rounding; the replicates are shown to one more decimal.", "I", 7.5, grey, 0)
}

// replicateText lists a result's replicate values to one decimal more than
// the result, or why a replicate has none.
func replicateText(r batch.ResultRec) string {
	parts := make([]string, len(r.Replicates))
	for i, rep := range r.Replicates {
		if rep.Value != nil {
			parts[i] = fixed(*rep.Value, r.Digits+1)
		} else {
			parts[i] = nonEmpty(rep.Note, "—")
		}
	}
	return strings.Join(parts, "; ")
}

// signedText writes a signed decimal with a proper minus sign: "+1.43",
// "−8.66".
func signedText(s string) string {
	if rest, neg := strings.CutPrefix(s, "-"); neg {
		return "−" + rest
	}
	return "+" + s
}

func joinInts(xs []int) string {
	s := make([]string, len(xs))
	for i, x := range xs {
		s[i] = strconv.Itoa(x)
	}
	return strings.Join(s, ", ")
}

// gateDecimals is how a gate's figures are shown.
func gateDecimals(kind string) int {
	switch kind {
	case pipeline.GatePlates:
		return 0
	case pipeline.GateSignalToNoise, pipeline.GateBlank:
		return 1
	}
	return 2
}

// suitability lists the gates.
func (d *lotDoc) suitability() {
	s := d.lot.Suitability
	if s == nil {
		return
	}
	d.section("System suitability", 14)
	t := d.newTable("System suitability", 8, 3, true,
		column{head: "Gate", share: 30}, column{head: "Criterion", share: 44},
		column{head: "Value", share: 14, right: true}, column{head: "Result", share: 14, inset: 3})
	t.start(7)
	for _, g := range s.Gates {
		v := "—"
		if g.Value != nil {
			v = fixed(*g.Value, gateDecimals(g.Gate))
			if g.Gate == pipeline.GateDrift {
				v = signedText(v)
			}
		}
		word, col := "passes", &passInk
		if g.Status != rules.Pass {
			word, col = "fails", &failInk
		}
		t.row(cell{text: g.Name}, cell{text: g.Criterion}, cell{text: v}, cell{text: word, bold: g.Status != rules.Pass, color: col})
	}
	for _, g := range s.Gates {
		if g.Status != rules.Pass {
			d.paragraph("• "+g.Name+": "+g.Reason, "", 7.5, black, 2)
		}
	}
	d.y += 1
	d.paragraph("The value is the worst over the suitability injections (the RSD for precision, the largest difference "+
		"for drift). Formulas used ("+s.Constants+" constants): "+strings.Join(s.Formulas, "; ")+".", "I", 7.5, grey, 0)
}

// calibration shows each component's curve: statistics, plot and points.
func (d *lotDoc) calibration() {
	cal := d.lot.Calibration
	if cal == nil {
		return
	}
	method := "external standard"
	if cal.Method == pipeline.InternalStandard {
		method = "internal standard " + cal.InternalStandard
	}
	d.section("Calibration ("+method+", amounts in "+cal.Unit+")", 70)
	for i, c := range cal.Components {
		if i > 0 {
			d.y += 2
		}
		d.subheading(fmt.Sprintf("%s: %s, weighting %s, response %s", c.Component, c.Model, c.Weighting, c.Response), 64)
		d.paragraph(calSummary(c, cal.Unit), "", 8, black, 0)
		if c.Status != rules.Pass {
			d.paragraph("Calibration fails: "+strings.Join(c.Reasons, "; ")+".", "B", 8, failInk, 0)
		}
		const plotH = 52.0
		d.ensure(plotH + 2)
		w := d.right - d.left
		drawCalPlot(d.doc, c, cal.Unit, d.left, d.y, 0.6*w-2, plotH)
		drawResidualPlot(d.doc, c, cal.Unit, d.left+0.6*w+2, d.y, 0.4*w-2, plotH)
		d.resetGraphics()
		d.y += plotH + 2
		t := d.newTable(c.Component+" calibration points", 7.5, 2, true,
			column{head: "Inj.", share: 7, right: true}, column{head: "Standard", share: 13, inset: 2},
			column{head: "Amount", share: 12, right: true}, column{head: "Response", share: 14, right: true},
			column{head: "Predicted", share: 14, right: true}, column{head: "Residual", share: 13, right: true},
			column{head: "Back-calc.", share: 13, right: true}, column{head: "Accuracy %", share: 12, right: true},
			column{head: "Status", share: 20, inset: 3})
		t.start(6)
		for _, p := range c.Points {
			word, col := conformity(p.Status)
			if p.Status == rules.Pass {
				word = "accepted"
			}
			if p.Reason != "" {
				word += ": " + p.Reason
			}
			t.row(cell{text: strconv.Itoa(p.Injection)}, cell{text: p.Standard}, cell{text: sig(p.Amount, 6)},
				cell{text: optSig(p.Response, 6)}, cell{text: optSig(p.Predicted, 6)}, cell{text: optSig(p.Residual, 3)},
				cell{text: optSig(p.BackCalculated, 5)}, cell{text: fixedPtr(p.Accuracy, 1)},
				cell{text: word, color: col})
		}
	}
}

// calSummary writes a calibration's equation and statistics in a line.
func calSummary(c batch.CalComponentRec, unit string) string {
	var parts []string
	if len(c.Coefficients) >= 2 {
		eq := "response = "
		if c.Coefficients[0] != 0 || c.Model != "linear-origin" && c.Model != pipeline.ResponseFactorModel {
			eq += sig(c.Coefficients[0], 6) + " + "
		}
		eq += sig(c.Coefficients[1], 6) + "·x"
		if len(c.Coefficients) > 2 {
			eq += " + " + sig(c.Coefficients[2], 6) + "·x²"
		}
		parts = append(parts, strings.ReplaceAll(eq, "+ -", "− "))
	}
	if c.R2 != nil {
		parts = append(parts, "r² = "+fixed(*c.R2, 6))
	}
	if c.ResidualSD != nil {
		w := ""
		if c.Weighting != "none" {
			w = " (weighted)"
		}
		parts = append(parts, "residual SD "+sig(*c.ResidualSD, 4)+w+", "+strconv.Itoa(c.DF)+" df")
	}
	parts = append(parts, fmt.Sprintf("calibrated range %s–%s %s", sig(c.RangeMin, 6), sig(c.RangeMax, 6), unit))
	if c.LOD != nil && c.LOQ != nil {
		parts = append(parts, fmt.Sprintf("LOD %s %s, LOQ %s %s (ICH Q2: 3.3σ/S and 10σ/S, unweighted line)",
			sig(*c.LOD, 3), unit, sig(*c.LOQ, 3), unit))
	}
	parts = append(parts, fmt.Sprintf("accepted back-calculation ±%s %% (±%s %% at the lowest level)",
		sig(c.MaxDeviation, 4), sig(c.MaxDeviationLowest, 4)))
	return strings.Join(parts, "; ") + "."
}

// sig writes x to n significant digits.
func sig(x float64, n int) string {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return "—"
	}
	return strconv.FormatFloat(x, 'g', n, 64)
}

func optSig(x *float64, n int) string {
	if x == nil {
		return "—"
	}
	return sig(*x, n)
}

// Colours of the calibration plots.
var (
	pointColor = color.RGBA{R: 0x1f, G: 0x3a, B: 0x6e, A: 0xff}
	fitColor   = color.RGBA{R: 0xc0, G: 0x39, B: 0x2b, A: 0xff}
	failColor  = color.RGBA{R: 0xa8, G: 0x1b, B: 0x1b, A: 0xff}
)

// points returns the calibration points with a response as (amount, f(point)),
// the failing ones apart.
func points(c batch.CalComponentRec, f func(batch.CalPointRec) *float64) (ok, bad plotter.XYs) {
	for _, p := range c.Points {
		v := f(p)
		if v == nil || math.IsNaN(*v) || math.IsInf(*v, 0) {
			continue
		}
		if p.Status == rules.Pass {
			ok = append(ok, plotter.XY{X: p.Amount, Y: *v})
		} else {
			bad = append(bad, plotter.XY{X: p.Amount, Y: *v})
		}
	}
	return ok, bad
}

// addPoints draws points as circles (failing ones as red crosses).
func addPoints(p *plot.Plot, ok, bad plotter.XYs) {
	for _, set := range []struct {
		xys   plotter.XYs
		col   color.Color
		shape draw.GlyphDrawer
	}{{ok, pointColor, draw.CircleGlyph{}}, {bad, failColor, draw.CrossGlyph{}}} {
		if len(set.xys) == 0 {
			continue
		}
		s, err := plotter.NewScatter(set.xys)
		if err != nil {
			continue
		}
		s.GlyphStyle = draw.GlyphStyle{Color: set.col, Radius: vg.Points(1.8), Shape: set.shape}
		p.Add(s)
	}
}

// xRange is the amount axis: from 0 to a little past the top standard.
func xRange(c batch.CalComponentRec) (lo, hi float64) {
	hi = c.RangeMax * 1.08
	if !(hi > 0) {
		hi = 1
	}
	return 0, hi
}

// fitYRange covers the points and the curve over [lo, hi].
func fitYRange(c batch.CalComponentRec, f func(float64) float64, lo, hi float64) (float64, float64) {
	ymin, ymax := math.Inf(1), math.Inf(-1)
	for k := 0; k <= 20; k++ {
		y := f(lo + (hi-lo)*float64(k)/20)
		ymin, ymax = math.Min(ymin, y), math.Max(ymax, y)
	}
	for _, p := range c.Points {
		if p.Response != nil {
			ymin, ymax = math.Min(ymin, *p.Response), math.Max(ymax, *p.Response)
		}
	}
	if ymin > 0 && ymin < 0.5*ymax {
		ymin = 0
	}
	if !(ymax > ymin) {
		ymin, ymax = ymin-1, ymax+1
	}
	return ymin, ymax + 0.05*(ymax-ymin)
}

// curveOf returns the fitted curve as a function, or nil without one.
func curveOf(c batch.CalComponentRec) func(float64) float64 {
	if len(c.Coefficients) < 2 {
		return nil
	}
	coef := slices.Clone(c.Coefficients)
	return func(x float64) float64 {
		y := 0.0
		for k := len(coef) - 1; k >= 0; k-- {
			y = y*x + coef[k]
		}
		return y
	}
}

// drawCalPlot draws the points and the fitted curve into the box (x, y, w,
// h), in millimetres from the page's top-left corner.
func drawCalPlot(doc *fpdf.Fpdf, c batch.CalComponentRec, unit string, x, y, w, h float64) {
	p := newPlot(c.Component+": points and fit", 2, "Amount ("+unit+")", "Response ("+c.Response+")")
	lo, hi := xRange(c)
	p.X.Min, p.X.Max = lo, hi
	f := curveOf(c)
	ok, bad := points(c, func(p batch.CalPointRec) *float64 { return p.Response })
	if f != nil {
		fn := plotter.NewFunction(f)
		fn.XMin, fn.XMax, fn.Samples = lo, hi, 60
		fn.LineStyle = draw.LineStyle{Color: fitColor, Width: vg.Points(0.6)}
		p.Add(fn)
		p.Y.Min, p.Y.Max = fitYRange(c, f, lo, hi)
	} else if all := append(slices.Clone(ok), bad...); len(all) > 0 {
		_, _, ymin, ymax := plotter.XYRange(all)
		p.Y.Min, p.Y.Max = math.Min(0, ymin), ymax*1.05+1e-12
	}
	addPoints(p, ok, bad)
	drawPlot(doc, p, x, y, w, h)
}

// drawResidualPlot draws each point's residual (response − predicted).
func drawResidualPlot(doc *fpdf.Fpdf, c batch.CalComponentRec, unit string, x, y, w, h float64) {
	p := newPlot("Residuals", 2, "Amount ("+unit+")", "Response − predicted")
	lo, hi := xRange(c)
	p.X.Min, p.X.Max = lo, hi
	ok, bad := points(c, func(p batch.CalPointRec) *float64 { return p.Residual })
	span := 0.0
	for _, xy := range append(slices.Clone(ok), bad...) {
		span = math.Max(span, math.Abs(xy.Y))
	}
	if !(span > 0) {
		span = 1
	}
	p.Y.Min, p.Y.Max = -1.2*span, 1.2*span
	zero := plotter.NewFunction(func(float64) float64 { return 0 })
	zero.XMin, zero.XMax, zero.Samples = lo, hi, 2
	zero.LineStyle = draw.LineStyle{Color: fitColor, Width: vg.Points(0.5), Dashes: []vg.Length{vg.Points(2), vg.Points(1.2)}}
	p.Add(zero)
	addPoints(p, ok, bad)
	drawPlot(doc, p, x, y, w, h)
}

// sequence lists every injection with its role and status.
func (d *lotDoc) sequence() {
	d.section("Sequence", 14)
	t := d.newTable("Sequence", 7.5, 2, true,
		column{head: "No.", share: 5, right: true}, column{head: "ID", share: 7, inset: 2},
		column{head: "Role", share: 12}, column{head: "Standard / sample", share: 26},
		column{head: "Data file", share: 22}, column{head: "Status", share: 40})
	t.start(6)
	for _, in := range d.lot.Injections {
		what := in.Standard
		if in.Sample != "" {
			what = fmt.Sprintf("%s, replicate %d", in.Sample, in.Replicate)
		}
		status, col := in.Status, (*rgb)(nil)
		switch in.Status {
		case batch.StatusValid:
			col = &passInk
		case batch.StatusInvalid:
			col = &undetInk
		default:
			col = &failInk
		}
		if len(in.Reasons) > 0 {
			status += ": " + strings.Join(in.Reasons, "; ")
		}
		t.row(cell{text: strconv.Itoa(in.Number)}, cell{text: in.ID}, cell{text: in.Role}, cell{text: nonEmpty(what, "—")},
			cell{text: in.File}, cell{text: status, color: col})
	}
}

// warnings lists the lot record's warnings.
func (d *lotDoc) warnings() {
	if len(d.lot.Warnings) == 0 {
		return
	}
	d.section("Warnings", 8)
	for _, w := range d.lot.Warnings {
		d.paragraph("• "+w, "", 8, black, 2)
	}
}

// provenance ties the summary to its pipeline, sequence, data and record.
func (d *lotDoc) provenance() {
	l, pv := d.lot, d.lot.Provenance
	d.section("Provenance", 20)
	t := d.newTable("Provenance", 8, 3, false, column{share: 28}, column{share: 72})
	kv := func(k, v string, mono bool) {
		t.row(cell{text: k, color: &grey}, cell{text: v, mono: mono})
	}
	kv("Software", strings.TrimSpace(pv.Tool+" "+pv.Version), false)
	kv("Pipeline file", nonEmpty(pv.PipelineFile, "—"), false)
	kv("Pipeline SHA-256", nonEmpty(pv.PipelineSHA256, "—"), true)
	if pv.BundleSHA256 != "" {
		kv("Frozen bundle SHA-256", pv.BundleSHA256, true)
	}
	if l.Method.Description != "" {
		kv("Method", l.Method.Description, false)
	}
	kv("Sequence file", nonEmpty(pv.SequenceFile, "—"), false)
	kv("Sequence SHA-256", nonEmpty(pv.SequenceSHA256, "—"), true)
	if l.Report.LogoFile != "" {
		kv("Logo file", l.Report.LogoFile, false)
		kv("Logo SHA-256", nonEmpty(l.Report.LogoSHA256, "—"), true)
	}
	kv("Lot record", batch.LotStem(l.Lot)+".json (the JSON record this summary renders)", false)
	kv("Lot record SHA-256", d.digest, true)
	kv("Processed at", nonEmpty(pv.ProcessedAt, "—"), false)
	d.subheading("Data files (SHA-256 of each file as processed)", 8)
	ft := d.newTable("Data files", 6.5, 1, true, column{head: "No.", share: 5, right: true},
		column{head: "File", share: 30, inset: 2}, column{head: "SHA-256", share: 65})
	ft.start(5)
	for _, in := range l.Injections {
		ft.row(cell{text: strconv.Itoa(in.Number)}, cell{text: in.File}, cell{text: nonEmpty(in.InputSHA256, "not processed"), mono: true})
	}
}

package reports

import (
	"errors"
	"fmt"
	"io"
	"math"
	"strconv"
	"strings"
	"time"
	"unicode/utf8"

	"github.com/xuri/excelize/v2"

	"lotgate/pipeline"
	"lotgate/pipeline/batch"
)

// Sheets of the lot workbook, in order; the chart data sheet is hidden.
const (
	lotSheetSummary     = "Summary"
	lotSheetResults     = "Results"
	lotSheetSuitability = "Suitability"
	lotSheetCalibration = "Calibration"
	lotSheetSequence    = "Sequence"
	lotSheetProvenance  = "Provenance"
	lotSheetChartData   = "Calibration chart data"
)

// lotCurvePoints is the number of points the fitted curve is drawn with.
const lotCurvePoints = 41

// WriteLotXLSX renders a lot record as a workbook: the verdict and its
// reasons, every sample's results with their replicates, the
// system-suitability gates with each injection's figure, each calibration
// with its points and a chart of points and curve, the sequence with every
// injection's status, and the provenance with every sequence-level setting.
// Every number is taken from the record; the bytes depend on the record
// alone (the document and zip entry times are its processed_at).
func WriteLotXLSX(w io.Writer, lot *batch.Lot) error {
	if lot == nil {
		return errors.New("lot xlsx: no lot record")
	}
	at, err := time.Parse(time.RFC3339, lot.Provenance.ProcessedAt)
	if err != nil {
		return fmt.Errorf("lot xlsx: processed_at %q is not an RFC 3339 time: %w", lot.Provenance.ProcessedAt, err)
	}
	at = at.UTC()
	digest, err := lotDigest(lot)
	if err != nil {
		return fmt.Errorf("lot xlsx: %w", err)
	}
	sheets := []string{lotSheetSummary, lotSheetResults, lotSheetSuitability, lotSheetCalibration, lotSheetSequence, lotSheetProvenance}
	if lot.Calibration != nil && len(lot.Calibration.Components) > 0 {
		sheets = append(sheets, lotSheetChartData)
	}
	// The record's report settings give the paper size of every sheet.
	b := newXLBook(&pipeline.Record{Report: lot.Report}, sheets...)
	defer b.f.Close()
	lx := &lotBook{xlBook: b, lot: lot}
	lx.summary()
	lx.results()
	lx.suitability()
	lx.calibration()
	lx.sequence()
	lx.provenance(digest)
	title := strings.TrimSpace(lot.Report.Product + " — lot " + lot.Lot)
	stamp := at.Format("2006-01-02T15:04:05Z")
	b.check(b.f.SetDocProps(&excelize.DocProperties{
		Title: title, Subject: lotTitle(lot), Created: stamp, Modified: stamp,
		Creator:     strings.TrimSpace(lot.Provenance.Tool + " " + lot.Provenance.Version),
		Description: "Rendered from the lot record " + batch.LotStem(lot.Lot) + ".json",
	}))
	if err := b.write(w, at); err != nil {
		return fmt.Errorf("lot xlsx: %w", err)
	}
	return nil
}

// lotBook is a lot workbook being built with the record workbook's helpers.
type lotBook struct {
	*xlBook
	lot *batch.Lot
}

// lotStatusStyle colours a lot verdict.
func (b *lotBook) lotStatusStyle(verdict string) int {
	switch verdict {
	case batch.Released:
		return b.pass
	case batch.Rejected:
		return b.fail
	}
	return b.other
}

// para writes a long text in a row merged over columns 1..cols, wrapped,
// with the row tall enough for it (width: the merged columns' width in
// characters).
func (b *lotBook) para(sheet string, row, cols int, text string, style int, width float64) {
	b.str(sheet, 1, row, text, style)
	if cols > 1 {
		b.check(b.f.MergeCell(sheet, xlCell(1, row), xlCell(cols, row)))
	}
	lines := max(1, int(math.Ceil(float64(utf8.RuneCountInString(text))/width)))
	if lines > 1 {
		b.check(b.f.SetRowHeight(sheet, row, math.Min(409, 15*float64(lines))))
	}
}

func (b *lotBook) summary() {
	const s = lotSheetSummary
	l := b.lot
	widths := []float64{26, 40, 20, 20, 20, 20}
	b.widths(s, widths...)
	b.page(s, false)
	total := 0.0
	for _, w := range widths {
		total += w
	}
	b.str(s, 1, 1, lotTitle(l), b.title)
	b.str(s, 1, 2, "Rendered from the lot record, which remains the reference copy.", b.note)
	row := 4
	kv := func(k, v string) {
		b.str(s, 1, row, k, b.label)
		b.str(s, 2, row, v, b.text)
		row++
	}
	kv("Product", l.Report.Product)
	kv("Grade", l.Report.Grade)
	kv("Site", l.Report.Site)
	kv("Lot", l.Lot)
	kv("Samples", strconv.Itoa(len(l.Samples)))
	kv("Sequence", fmt.Sprintf("%s (%d injections)", l.Sequence.Name, l.Sequence.Injections))
	if l.Sequence.Description != "" {
		kv("Sequence description", l.Sequence.Description)
	}
	kv("Sequence file", l.Provenance.SequenceFile)
	kv("Method", fmt.Sprintf("%s, revision %d", l.Method.Name, l.Method.Revision))
	kv("Processed at (UTC)", l.Provenance.ProcessedAt)
	row++
	words, _, _ := verdictWords(l)
	b.str(s, 1, row, "Verdict", b.bold)
	b.str(s, 2, row, strings.ToUpper(l.Verdict), b.lotStatusStyle(l.Verdict))
	row++
	b.para(s, row, 6, words, b.wrap, total)
	row += 2
	// list writes a titled list of paragraphs; none, when not "", stands
	// for an empty list.
	list := func(title string, items []string, none string) {
		b.str(s, 1, row, title, b.bold)
		row++
		if len(items) == 0 && none != "" {
			b.str(s, 1, row, none, b.text)
			row++
		}
		for _, it := range items {
			b.para(s, row, 6, it, b.wrap, total)
			row++
		}
	}
	list("Reasons", l.Reasons, "None.")
	row++
	b.str(s, 1, row, "Samples", b.bold)
	row++
	b.headers(s, row, "Sample", "Injections", "Status", "Verdict")
	row++
	for _, sm := range l.Samples {
		b.str(s, 1, row, sm.Sample, b.text)
		b.str(s, 2, row, joinInts(sm.Injections), b.text)
		b.str(s, 3, row, sm.Status, b.text)
		b.str(s, 4, row, sm.Verdict, b.statusStyle(sm.Verdict))
		row++
	}
	row++
	list("Warnings", l.Warnings, "None.")
	row++
	list("Cautions", l.Report.Cautions, "")
}

func (b *lotBook) results() {
	const s = lotSheetResults
	l := b.lot
	b.page(s, true)
	reps := 0
	for _, sm := range l.Samples {
		for _, r := range sm.Results {
			reps = max(reps, len(r.Replicates))
		}
	}
	head := []string{"Sample", "Sample status", "Test", "Value expression"}
	for k := range reps {
		head = append(head, fmt.Sprintf("Replicate %d", k+1))
	}
	head = append(head, "n", "Mean", "SD", "RSD (%)", "Allowed RSD (%)", "Reported", "Minimum", "Maximum", "Unit",
		"Rounding", "Status", "Reason")
	b.headers(s, 1, head...)
	b.freezeTop(s)
	b.check(b.f.SetRowHeight(s, 1, 30))
	ws := []float64{18, 12, 22, 28}
	for range reps {
		ws = append(ws, 13)
	}
	b.widths(s, append(ws, 5, 13, 12, 9, 10, 11, 9, 9, 18, 11, 13, 50)...)
	row := 2
	if len(l.Samples) == 0 {
		b.str(s, 1, row, "The lot has no sample.", b.note)
	}
	for _, sm := range l.Samples {
		if len(sm.Results) == 0 {
			b.str(s, 1, row, sm.Sample, b.text)
			b.str(s, 3, row, "No specification limit applies.", b.note)
			row++
		}
		for _, r := range sm.Results {
			b.str(s, 1, row, sm.Sample, b.text)
			b.str(s, 2, row, sm.Status, b.text)
			b.str(s, 3, row, r.Name, b.wrap)
			b.str(s, 4, row, r.Expr, b.wrap)
			col := 5
			for k := range reps {
				if k < len(r.Replicates) {
					if v := r.Replicates[k].Value; v != nil {
						b.float(s, col+k, row, *v, b.num("General"))
					} else {
						b.str(s, col+k, row, r.Replicates[k].Note, b.muted)
					}
				}
			}
			col += reps
			b.integer(s, col, row, r.N, b.num("0"))
			b.optFloat(s, col+1, row, r.Mean, b.num("General"))
			b.optFloat(s, col+2, row, r.SD, b.num("General"))
			b.optFloat(s, col+3, row, r.RSD, b.num("0.00"))
			b.optFloat(s, col+4, row, r.MaxRSD, b.num("General"))
			b.str(s, col+5, row, r.Reported, b.text)
			b.str(s, col+6, row, r.Min, b.text)
			b.str(s, col+7, row, r.Max, b.text)
			b.str(s, col+8, row, r.Unit, b.wrap)
			b.str(s, col+9, row, r.Rounding, b.text)
			status := r.Status
			if sm.Status == batch.StatusInvalid {
				status = "invalid run"
			}
			b.str(s, col+10, row, status, b.statusStyle(status))
			b.str(s, col+11, row, r.Reason, b.wrap)
			row++
		}
	}
}

func (b *lotBook) suitability() {
	const s = lotSheetSuitability
	su := b.lot.Suitability
	b.page(s, true)
	b.widths(s, 30, 46, 10, 14, 14, 10, 60)
	if su == nil {
		b.str(s, 1, 1, "The pipeline has no suitability block.", b.note)
		return
	}
	b.str(s, 1, 1, "System suitability", b.bold)
	b.str(s, 1, 2, "Constants", b.label)
	b.str(s, 2, 2, su.Constants, b.text)
	row := 3
	for _, f := range su.Formulas {
		b.str(s, 2, row, f, b.text)
		row++
	}
	row++
	b.headers(s, row, "Gate", "Criterion", "Value", "Status", "Invalidates", "", "Reason")
	row++
	for _, g := range su.Gates {
		b.str(s, 1, row, g.Name, b.text)
		b.str(s, 2, row, g.Criterion, b.wrap)
		b.optFloat(s, 3, row, g.Value, b.num("General"))
		b.str(s, 4, row, g.Status, b.statusStyle(g.Status))
		b.str(s, 5, row, joinInts(g.Invalidates), b.wrap)
		b.str(s, 7, row, g.Reason, b.wrap)
		row++
	}
	row++
	b.str(s, 1, row, "Figures per injection", b.bold)
	row++
	b.headers(s, row, "Gate", "Injection (ID)", "Component", "Value", "Status", "", "Note")
	row++
	for _, g := range su.Gates {
		for _, v := range g.Values {
			b.str(s, 1, row, g.Name, b.text)
			b.str(s, 2, row, fmt.Sprintf("%d (%s)", v.Injection, v.ID), b.text)
			b.str(s, 3, row, v.Component, b.text)
			b.optFloat(s, 4, row, v.Value, b.num("General"))
			b.str(s, 5, row, v.Status, b.statusStyle(v.Status))
			b.str(s, 7, row, v.Note, b.wrap)
			row++
		}
	}
}

func (b *lotBook) calibration() {
	const s = lotSheetCalibration
	cal := b.lot.Calibration
	b.page(s, true)
	b.widths(s, 10, 8, 11, 7, 12, 14, 14, 13, 15, 12, 10, 50)
	if cal == nil {
		b.str(s, 1, 1, "The pipeline has no calibration block.", b.note)
		return
	}
	b.str(s, 1, 1, "Calibration: "+cal.Method+" standard, amounts in "+cal.Unit, b.bold)
	if cal.InternalStandard != "" {
		b.str(s, 1, 2, "Internal standard: "+cal.InternalStandard, b.text)
	}
	row, dataRow := 4, 1
	const d = lotSheetChartData
	b.widths(d, 16, 14, 14, 14)
	for ci, c := range cal.Components {
		b.str(s, 1, row, c.Component, b.bold)
		row++
		kv := func(k string, v string) {
			b.str(s, 1, row, k, b.label)
			b.check(b.f.MergeCell(s, xlCell(1, row), xlCell(3, row)))
			b.str(s, 4, row, v, b.text)
			row++
		}
		kvNum := func(k string, v *float64) {
			b.str(s, 1, row, k, b.label)
			b.check(b.f.MergeCell(s, xlCell(1, row), xlCell(3, row)))
			if v != nil {
				b.float(s, 4, row, *v, b.num("General"))
			} else {
				b.str(s, 4, row, "—", b.muted)
			}
			row++
		}
		kv("Model", c.Model)
		kv("Weighting", c.Weighting)
		kv("Response", c.Response)
		for k, x := range c.Coefficients {
			kvNum(fmt.Sprintf("Coefficient b%d", k), &x)
		}
		for k, x := range c.StandardErrors {
			kvNum(fmt.Sprintf("Standard error of b%d", k), &x)
		}
		kvNum("r²", c.R2)
		kvNum("Residual SD", c.ResidualSD)
		kv("Degrees of freedom", strconv.Itoa(c.DF))
		kvNum("LOD (ICH Q2, 3.3σ/S) ("+cal.Unit+")", c.LOD)
		kvNum("LOQ (ICH Q2, 10σ/S) ("+cal.Unit+")", c.LOQ)
		kv("Calibrated range ("+cal.Unit+")", sig(c.RangeMin, 10)+" – "+sig(c.RangeMax, 10))
		kv("Accepted back-calculation", fmt.Sprintf("±%s %% (±%s %% at the lowest level)", sig(c.MaxDeviation, 6), sig(c.MaxDeviationLowest, 6)))
		if c.MinR2 > 0 {
			kv("Least r²", sig(c.MinR2, 10))
		}
		b.str(s, 1, row, "Status", b.label)
		b.check(b.f.MergeCell(s, xlCell(1, row), xlCell(3, row)))
		b.str(s, 4, row, c.Status, b.statusStyle(c.Status))
		b.str(s, 5, row, strings.Join(c.Reasons, "; "), b.text)
		row += 2
		b.headers(s, row, "Injection", "ID", "Standard", "Level", "Amount", "Response", "Predicted", "Residual",
			"Back-calculated", "Accuracy (%)", "Status", "Reason")
		row++
		for _, p := range c.Points {
			b.integer(s, 1, row, p.Injection, b.num("0"))
			b.str(s, 2, row, p.ID, b.text)
			b.str(s, 3, row, p.Standard, b.text)
			b.integer(s, 4, row, p.Level, b.num("0"))
			b.float(s, 5, row, p.Amount, b.num("General"))
			b.optFloat(s, 6, row, p.Response, b.num("General"))
			b.optFloat(s, 7, row, p.Predicted, b.num("General"))
			b.optFloat(s, 8, row, p.Residual, b.num("General"))
			b.optFloat(s, 9, row, p.BackCalculated, b.num("General"))
			b.optFloat(s, 10, row, p.Accuracy, b.num("0.0"))
			b.str(s, 11, row, p.Status, b.statusStyle(p.Status))
			b.str(s, 12, row, p.Reason, b.wrap)
			row++
		}
		if top := b.chart(c, ci, dataRow, cal.Unit, xlCell(1, row+1)); top > 0 {
			dataRow = top
			row += 24
		}
		row += 2
	}
	b.check(b.f.SetSheetVisible(d, false))
}

// chart writes a component's points and curve into the chart data sheet
// from dataRow on and adds a chart of them at cell; it returns the next
// free data row (0 when there is nothing to draw).
func (b *lotBook) chart(c batch.CalComponentRec, ci, dataRow int, unit, cell string) int {
	const d = lotSheetChartData
	f := curveOf(c)
	var pts [][2]float64
	for _, p := range c.Points {
		if p.Response != nil {
			pts = append(pts, [2]float64{p.Amount, *p.Response})
		}
	}
	if len(pts) == 0 {
		return 0
	}
	col := 1 + 4*ci // four columns per component: amount, response, curve amount, curve response
	b.str(d, col, dataRow, c.Component+" amount", b.header)
	b.str(d, col+1, dataRow, "standards", b.header)
	b.str(d, col+2, dataRow, c.Component+" curve amount", b.header)
	b.str(d, col+3, dataRow, "fitted "+c.Model+" curve", b.header)
	for k, p := range pts {
		b.float(d, col, dataRow+1+k, p[0], b.num("General"))
		b.float(d, col+1, dataRow+1+k, p[1], b.num("General"))
	}
	curve := 0
	if f != nil {
		lo, hi := xRange(c)
		for k := range lotCurvePoints {
			x := lo + (hi-lo)*float64(k)/float64(lotCurvePoints-1)
			if y := f(x); !math.IsNaN(y) && !math.IsInf(y, 0) {
				b.float(d, col+2, dataRow+1+curve, x, b.num("General"))
				b.float(d, col+3, dataRow+1+curve, y, b.num("General"))
				curve++
			}
		}
	}
	ref := func(c, from, n int) string {
		name, _ := excelize.ColumnNumberToName(c)
		return fmt.Sprintf("'%s'!$%s$%d:$%s$%d", d, name, from, name, from+n-1)
	}
	cellRef := func(c, r int) string {
		name, _ := excelize.ColumnNumberToName(c)
		return fmt.Sprintf("'%s'!$%s$%d", d, name, r)
	}
	series := []excelize.ChartSeries{{
		Name: cellRef(col+1, dataRow), Categories: ref(col, dataRow+1, len(pts)), Values: ref(col+1, dataRow+1, len(pts)),
		Line: excelize.LineOptions{Type: excelize.LineNone},
		Marker: excelize.ChartMarker{Symbol: "circle", Size: 7,
			Fill:   excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{"#1F3A6E"}},
			Border: excelize.LineOptions{Type: excelize.LineSolid, Width: 0.75, Fill: excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{"#1F3A6E"}}}},
	}}
	if curve > 0 {
		series = append(series, excelize.ChartSeries{
			Name: cellRef(col+3, dataRow), Categories: ref(col+2, dataRow+1, curve), Values: ref(col+3, dataRow+1, curve),
			Line:   excelize.LineOptions{Type: excelize.LineSolid, Width: 1.25, Fill: excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{"#C0392B"}}},
			Marker: excelize.ChartMarker{Symbol: "none"},
		})
	}
	title := c.Component + ": calibration points and fitted curve"
	b.check(b.f.AddChart(lotSheetCalibration, cell, &excelize.Chart{
		Type: excelize.Scatter, Series: series,
		Title:     excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: title}}},
		Legend:    excelize.ChartLegend{Position: "bottom"},
		Dimension: excelize.ChartDimension{Width: 720, Height: 440},
		XAxis: excelize.ChartAxis{MajorGridLines: true,
			Title: excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: "Amount (" + unit + ")"}}}},
		YAxis: excelize.ChartAxis{MajorGridLines: true,
			Title: excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: "Response (" + c.Response + ")"}}}},
	}))
	return dataRow + 2 + max(len(pts), curve)
}

func (b *lotBook) sequence() {
	const s = lotSheetSequence
	b.page(s, true)
	b.headers(s, 1, "No.", "ID", "Role", "Standard", "Lot", "Sample", "Replicate", "Data file", "Data file SHA-256",
		"Record", "Status", "Reasons")
	b.freezeTop(s)
	b.widths(s, 6, 8, 12, 10, 15, 18, 10, 22, 66, 22, 10, 70)
	for i, in := range b.lot.Injections {
		row := i + 2
		b.integer(s, 1, row, in.Number, b.num("0"))
		b.str(s, 2, row, in.ID, b.text)
		b.str(s, 3, row, in.Role, b.text)
		b.str(s, 4, row, in.Standard, b.text)
		b.str(s, 5, row, in.Lot, b.text)
		b.str(s, 6, row, in.Sample, b.text)
		if in.Replicate > 0 {
			b.integer(s, 7, row, in.Replicate, b.num("0"))
		}
		b.str(s, 8, row, in.File, b.text)
		b.str(s, 9, row, in.InputSHA256, b.text)
		b.str(s, 10, row, in.Record, b.text)
		style := b.pass
		switch in.Status {
		case batch.StatusValid:
		case batch.StatusInvalid:
			style = b.other
		default:
			style = b.fail
		}
		b.str(s, 11, row, in.Status, style)
		b.str(s, 12, row, strings.Join(in.Reasons, "; "), b.wrap)
	}
}

func (b *lotBook) provenance(digest string) {
	const s = lotSheetProvenance
	l, p := b.lot, b.lot.Provenance
	b.page(s, false)
	b.widths(s, 30, 34, 70)
	row := 1
	section := func(title string) {
		if row > 1 {
			row++
		}
		b.str(s, 1, row, title, b.bold)
		row++
	}
	kv := func(k, v string) {
		b.str(s, 1, row, k, b.label)
		b.str(s, 2, row, v, b.text)
		row++
	}
	section("Lot record")
	kv("Schema", l.Schema)
	kv("Tool", p.Tool)
	kv("Version", p.Version)
	kv("Pipeline file", p.PipelineFile)
	kv("Pipeline SHA-256", p.PipelineSHA256)
	if p.BundleSHA256 != "" {
		kv("Frozen bundle SHA-256", p.BundleSHA256)
	}
	kv("Sequence file", p.SequenceFile)
	kv("Sequence SHA-256", p.SequenceSHA256)
	kv("Processed at (UTC)", p.ProcessedAt)
	kv("Lot record", batch.LotStem(l.Lot)+".json")
	kv("Lot record SHA-256", digest)
	section("Method")
	kv("Name", l.Method.Name)
	kv("Revision", strconv.Itoa(l.Method.Revision))
	kv("Description", l.Method.Description)
	section("Sequence-level settings")
	b.headers(s, row, "Block", "Setting", "Value")
	row++
	for _, blk := range []struct {
		name string
		m    map[string]any
	}{{"calibration", l.Method.Calibration}, {"suitability", l.Method.Suitability}, {"replicates", l.Method.Replicates}} {
		if blk.m == nil {
			b.str(s, 1, row, blk.name, b.text)
			b.str(s, 2, row, "(no block)", b.muted)
			row++
			continue
		}
		rows, err := xlSettings(blk.m)
		b.check(err)
		row = b.settingRows(s, row, blk.name, rows, func() int { return b.num("General") })
	}
	section("Report settings")
	xlReportSettings(l.Report, kv)
}

package reports

import (
	"archive/zip"
	"bytes"
	"compress/flate"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"slices"
	"sort"
	"strconv"
	"strings"
	"sync"
	"time"
	"unicode/utf8"

	"github.com/xuri/excelize/v2"

	"lotgate/pipeline"
	"lotgate/rules"
)

// Sheet names of the workbook, in order. The chart data sheet is hidden.
const (
	xlSheetSummary      = "Summary"
	xlSheetChromatogram = "Chromatogram"
	xlSheetPeaks        = "Peaks"
	xlSheetComponents   = "Components"
	xlSheetProvenance   = "Provenance"
	xlSheetTrace        = "Trace"
	xlSheetChartData    = "Chart data"
)

// xlChartBuckets is the number of min–max buckets a long trace is reduced to
// for the charts: at most two rows per bucket, so a chart never draws more
// than 2·xlChartBuckets points, and no peak apex is lost.
const xlChartBuckets = 1000

// Fills of the verdict and status cells: pass, fail, anything else.
const (
	xlFillPass  = "#B9E3B4"
	xlFillFail  = "#F2B1AA"
	xlFillOther = "#F7D88A"
)

// WriteXLSX renders the record as a workbook: a summary with the limits and
// the verdict, the peaks, the components, the provenance with every method
// setting, the trace, and charts of the trace. Every number shown is taken
// from the record; the trace times are t_i = start_min + i·interval_min.
//
// The bytes depend on the record alone: the document dates and the zip
// entry times are the record's processed_at, so the same record always
// gives the same file.
func WriteXLSX(w io.Writer, rec *pipeline.Record) error {
	if rec == nil {
		return errors.New("xlsx: no record")
	}
	return writeXLSX(w, rec, digestLater(rec))
}

// writeXLSX is WriteXLSX with the record's digest supplied.
func writeXLSX(w io.Writer, rec *pipeline.Record, digest digest) error {
	if rec == nil {
		return errors.New("xlsx: no record")
	}
	at, err := time.Parse(time.RFC3339, rec.Provenance.ProcessedAt)
	if err != nil {
		return fmt.Errorf("xlsx: the record's processed_at %q is not an RFC 3339 time: %w", rec.Provenance.ProcessedAt, err)
	}
	at = at.UTC()
	if err := xlCheckTrace(rec.Trace); err != nil {
		return fmt.Errorf("xlsx: %w", err)
	}
	sheets := []string{xlSheetSummary, xlSheetChromatogram, xlSheetPeaks, xlSheetComponents, xlSheetProvenance, xlSheetTrace}
	if rec.Trace != nil && rec.Trace.Points > 0 {
		sheets = append(sheets, xlSheetChartData)
	}
	b := newXLBook(rec, sheets...)
	defer b.f.Close()
	b.summary()
	b.peaks()
	b.components()
	b.provenance()
	b.charts()
	b.docProps(at)
	// The trace is streamed last: once streamed, its sheet must not be
	// touched again (excelize would parse it back whenever any call
	// visits every sheet, as hiding a sheet does).
	b.trace()
	sum, err := digest()
	b.check(err)
	b.str(xlSheetProvenance, 2, b.digestRow, sum, b.text)
	if err := b.write(w, at); err != nil {
		return fmt.Errorf("xlsx: %w", err)
	}
	return nil
}

// newXLBook starts a workbook with the house styles and the named sheets,
// in order; rec's report settings give the paper. The caller closes b.f.
func newXLBook(rec *pipeline.Record, sheets ...string) *xlBook {
	b := &xlBook{f: excelize.NewFile(), rec: rec, numStyles: map[string]int{}}
	b.styles()
	b.check(b.f.SetSheetName("Sheet1", sheets[0]))
	for _, name := range sheets[1:] {
		_, err := b.f.NewSheet(name)
		b.check(err)
	}
	return b
}

// write reports the first error met while building the workbook, or else
// writes the workbook to w as a zip with every entry stamped at.
func (b *xlBook) write(w io.Writer, at time.Time) error {
	// excelize lists the image content types from a map, in an order
	// that changes from run to run: put them in name order.
	if ct := b.f.ContentTypes; ct != nil {
		sort.SliceStable(ct.Defaults, func(i, j int) bool { return ct.Defaults[i].Extension < ct.Defaults[j].Extension })
	}
	if b.err != nil {
		return b.err
	}
	// The zip is written straight to w, entry by entry; excelize's own
	// buffer stays empty.
	zw := &xlZip{zw: zip.NewWriter(w), at: at}
	zw.zw.RegisterCompressor(zip.Deflate, xlCompressor)
	b.f.SetZipWriter(func(io.Writer) excelize.ZipWriter { return zw })
	buf, err := b.f.WriteToBuffer()
	if err != nil {
		return err
	}
	if buf.Len() != 0 {
		return errors.New("the workbook library wrote outside the zip stream")
	}
	return nil
}

// xlFlate pools the compressors of the zip entries: a workbook has a score
// of entries and each compressor holds about a megabyte of tables.
var xlFlate sync.Pool

// xlCompressor compresses one zip entry at the fastest deflate level: the
// trace sheet dominates the work, and its numbers compress well anyway.
func xlCompressor(out io.Writer) (io.WriteCloser, error) {
	if fw, ok := xlFlate.Get().(*flate.Writer); ok {
		fw.Reset(out)
		return xlPooledFlate{fw}, nil
	}
	fw, err := flate.NewWriter(out, flate.BestSpeed)
	return xlPooledFlate{fw}, err
}

// xlPooledFlate returns its compressor to the pool when closed.
type xlPooledFlate struct{ *flate.Writer }

func (p xlPooledFlate) Close() error {
	err := p.Writer.Close()
	xlFlate.Put(p.Writer)
	return err
}

// xlZip is the zip writer handed to excelize: entries go straight to
// the destination, each stamped with one fixed time.
type xlZip struct {
	zw *zip.Writer
	at time.Time
}

// Create implements excelize.ZipWriter.
func (z *xlZip) Create(name string) (io.Writer, error) {
	return z.zw.CreateHeader(&zip.FileHeader{Name: name, Method: zip.Deflate, Modified: z.at})
}

// AddFS implements excelize.ZipWriter; a file system would bring its own
// file times, so it is refused.
func (z *xlZip) AddFS(fs.FS) error {
	return errors.New("adding a file system to the workbook is not supported")
}

// Close implements excelize.ZipWriter.
func (z *xlZip) Close() error { return z.zw.Close() }

// xlCheckTrace reports a trace whose signals do not line up.
func xlCheckTrace(tr *pipeline.TraceRec) error {
	if tr == nil {
		return nil
	}
	n := len(tr.Raw)
	if tr.Points != n {
		return fmt.Errorf("trace: points is %d but raw holds %d values", tr.Points, n)
	}
	if len(tr.Processed) != 0 && len(tr.Processed) != n {
		return fmt.Errorf("trace: processed holds %d values, raw %d", len(tr.Processed), n)
	}
	if len(tr.Baseline) != 0 && len(tr.Baseline) != n {
		return fmt.Errorf("trace: baseline holds %d values, raw %d", len(tr.Baseline), n)
	}
	if n+1 > excelize.TotalRows {
		return fmt.Errorf("trace: %d points do not fit the %d rows of a sheet", n, excelize.TotalRows-1)
	}
	return nil
}

// xlBook holds the workbook being built. The first error stops further
// writing and is returned by WriteXLSX.
type xlBook struct {
	f   *excelize.File
	rec *pipeline.Record
	err error
	// digestRow is the Provenance row that gets the record's digest.
	digestRow int

	title, note, label, header, text, wrap, bold int
	pass, fail, other                            int
	muted, center, numLeft                       int
	numStyles                                    map[string]int
}

func (b *xlBook) check(err error) {
	if b.err == nil && err != nil {
		b.err = err
	}
}

func (b *xlBook) style(s *excelize.Style) int {
	id, err := b.f.NewStyle(s)
	b.check(err)
	return id
}

func xlFill(color string) excelize.Fill {
	return excelize.Fill{Type: "pattern", Pattern: 1, Color: []string{color}}
}

func (b *xlBook) styles() {
	top := &excelize.Alignment{Vertical: "top"}
	b.title = b.style(&excelize.Style{Font: &excelize.Font{Bold: true, Size: 14}})
	b.note = b.style(&excelize.Style{Font: &excelize.Font{Italic: true, Color: "#555555"}})
	b.label = b.style(&excelize.Style{Font: &excelize.Font{Bold: true}, Alignment: top})
	b.bold = b.style(&excelize.Style{Font: &excelize.Font{Bold: true, Size: 12}})
	b.header = b.style(&excelize.Style{
		Font:      &excelize.Font{Bold: true},
		Fill:      xlFill("#E3E6EA"),
		Border:    []excelize.Border{{Type: "bottom", Color: "#7F7F7F", Style: 1}},
		Alignment: &excelize.Alignment{Vertical: "center", WrapText: true},
	})
	b.text = b.style(&excelize.Style{Alignment: top})
	b.wrap = b.style(&excelize.Style{Alignment: &excelize.Alignment{Vertical: "top", WrapText: true}})
	b.muted = b.style(&excelize.Style{Font: &excelize.Font{Color: "#7F7F7F"}, Alignment: top})
	b.center = b.style(&excelize.Style{Alignment: &excelize.Alignment{Vertical: "top", Horizontal: "center"}})
	b.numLeft = b.style(&excelize.Style{Alignment: &excelize.Alignment{Vertical: "top", Horizontal: "left"}})
	verdict := func(color string) int {
		return b.style(&excelize.Style{Font: &excelize.Font{Bold: true}, Fill: xlFill(color), Alignment: top})
	}
	b.pass, b.fail, b.other = verdict(xlFillPass), verdict(xlFillFail), verdict(xlFillOther)
}

// num returns the style that shows numbers in format, e.g. "0.000"
// ("General" for the default).
func (b *xlBook) num(format string) int {
	if id, ok := b.numStyles[format]; ok {
		return id
	}
	s := &excelize.Style{Alignment: &excelize.Alignment{Vertical: "top"}}
	if format != "General" {
		s.CustomNumFmt = &format
	}
	id := b.style(s)
	b.numStyles[format] = id
	return id
}

// statusStyle colours a pass/fail status or verdict.
func (b *xlBook) statusStyle(status string) int {
	switch status {
	case rules.Pass:
		return b.pass
	case rules.Fail:
		return b.fail
	}
	return b.other
}

// xlCell names a cell by 1-based column and row.
func xlCell(col, row int) string {
	name, _ := excelize.CoordinatesToCellName(col, row)
	return name
}

// str writes text with a style.
func (b *xlBook) str(sheet string, col, row int, v string, style int) {
	if b.err != nil {
		return
	}
	c := xlCell(col, row)
	b.check(b.f.SetCellStr(sheet, c, v))
	b.check(b.f.SetCellStyle(sheet, c, c, style))
}

// float writes v as a number cell holding exactly the float64 v (excelize
// would cut an automatic precision to 15 significant digits).
func (b *xlBook) float(sheet string, col, row int, v float64, style int) {
	if b.err != nil {
		return
	}
	c := xlCell(col, row)
	b.check(b.f.SetCellFloat(sheet, c, v, xlDecimals(v), 64))
	b.check(b.f.SetCellStyle(sheet, c, c, style))
}

// optFloat writes v when it is not nil and leaves the cell empty otherwise.
func (b *xlBook) optFloat(sheet string, col, row int, v *float64, style int) {
	if v != nil {
		b.float(sheet, col, row, *v, style)
	}
}

// integer writes an integer number cell.
func (b *xlBook) integer(sheet string, col, row, v int, style int) {
	if b.err != nil {
		return
	}
	c := xlCell(col, row)
	b.check(b.f.SetCellInt(sheet, c, int64(v)))
	b.check(b.f.SetCellStyle(sheet, c, c, style))
}

// xlDecimals is the number of decimals that writes v in fixed notation as
// its shortest round-tripping decimal.
func xlDecimals(v float64) int {
	s := strconv.FormatFloat(v, 'f', -1, 64)
	if i := strings.IndexByte(s, '.'); i >= 0 {
		return len(s) - i - 1
	}
	return 0
}

// headers writes a header row.
func (b *xlBook) headers(sheet string, row int, names ...string) {
	for i, h := range names {
		b.str(sheet, i+1, row, h, b.header)
	}
}

// widths sets column widths, starting at column A.
func (b *xlBook) widths(sheet string, ws ...float64) {
	for i, wd := range ws {
		c, _ := excelize.ColumnNumberToName(i + 1)
		b.check(b.f.SetColWidth(sheet, c, c, wd))
	}
}

// freezeTop keeps the first row of a sheet in view on screen.
func (b *xlBook) freezeTop(sheet string) {
	b.check(b.f.SetPanes(sheet, &excelize.Panes{Freeze: true, YSplit: 1, TopLeftCell: "A2", ActivePane: "bottomLeft"}))
}

// freeze keeps the header row in view on screen and repeats it on every
// printed page.
func (b *xlBook) freeze(sheet string) {
	b.freezeTop(sheet)
	b.check(b.f.SetDefinedName(&excelize.DefinedName{Name: "_xlnm.Print_Titles", RefersTo: "'" + sheet + "'!$1:$1", Scope: sheet}))
}

// paragraph writes text into a row merged over columns from..to, wrapped,
// with the row tall enough for it; widths are the sheet's column widths.
func (b *xlBook) paragraph(sheet string, row, from, to int, text string, widths []float64) {
	b.str(sheet, from, row, text, b.wrap)
	if to > from {
		b.check(b.f.MergeCell(sheet, xlCell(from, row), xlCell(to, row)))
	}
	width := 0.0
	for _, wd := range widths[from-1 : to] {
		width += wd
	}
	lines := 0
	for _, ln := range strings.Split(text, "\n") {
		lines += max(1, int(math.Ceil(float64(utf8.RuneCountInString(ln))/width)))
	}
	if lines > 1 {
		b.check(b.f.SetRowHeight(sheet, row, math.Min(409, 15*float64(lines))))
	}
}

// page sets the paper and orientation from the record and fits the sheet to
// the page width.
func (b *xlBook) page(sheet string, landscape bool) {
	size := 9 // A4
	if b.rec.Report.Paper == "Letter" {
		size = 1
	}
	orient := "portrait"
	if landscape {
		orient = "landscape"
	}
	one, all := 1, 0
	b.check(b.f.SetPageLayout(sheet, &excelize.PageLayoutOptions{Size: &size, Orientation: &orient, FitToWidth: &one, FitToHeight: &all}))
	fit := true
	b.check(b.f.SetSheetProps(sheet, &excelize.SheetPropsOptions{FitToPage: &fit}))
	b.check(b.f.SetHeaderFooter(sheet, &excelize.HeaderFooterOptions{OddFooter: "&L&A&RPage &P of &N"}))
}

// meta returns the value of a metadata key and whether it is present.
func (b *xlBook) meta(key string) (string, bool) {
	for _, m := range b.rec.Sample.Metadata {
		if m.Key == key {
			return m.Value, true
		}
	}
	return "", false
}

// signalUnit names the signal unit for headers.
func (b *xlBook) signalUnit() string {
	if u := b.rec.Units.Signal; u != "" {
		return u
	}
	return "signal units"
}

// areaUnit names the area unit for headers.
func (b *xlBook) areaUnit() string {
	if u := b.rec.Units.Area; u != "" {
		return u
	}
	return "signal·s"
}

// xlVerdict states the verdict plainly, e.g. "PASS — all limits met" or
// "FAIL — 2 limits not met".
func xlVerdict(rec *pipeline.Record) string {
	failed, erred := 0, 0
	for _, l := range rec.Limits {
		switch l.Status {
		case rules.Pass:
		case rules.Fail:
			failed++
		default:
			erred++
		}
	}
	switch rec.Verdict {
	case rules.Pass:
		if len(rec.Limits) == 0 {
			return "PASS — no limits apply"
		}
		return "PASS — all limits met"
	case rules.Fail:
		return "FAIL — " + xlPlural(failed, "limit") + " not met"
	case rules.Undetermined:
		var why []string
		if erred > 0 {
			why = append(why, xlPlural(erred, "limit")+" could not be checked")
		}
		if rec.Batch != nil && rec.Batch.Status == "invalid" {
			why = append(why, "the run is invalid and its results may not be used")
		}
		if len(why) == 0 {
			why = append(why, "see the warnings")
		}
		return "UNDETERMINED — " + strings.Join(why, "; ")
	case "":
		return "NO VERDICT — the record holds none"
	}
	return strings.ToUpper(rec.Verdict)
}

func xlPlural(n int, noun string) string {
	if n == 1 {
		return "1 " + noun
	}
	return strconv.Itoa(n) + " " + noun + "s"
}

// Summary layout: the limits table spans these columns.
var xlSummaryWidths = []float64{28, 30, 18, 11, 10, 10, 20, 11, 13, 52}

func (b *xlBook) summary() {
	const s = xlSheetSummary
	rec := b.rec
	b.widths(s, xlSummaryWidths...)
	b.page(s, true)
	cols := len(xlSummaryWidths)

	b.str(s, 1, 1, "Release results by gas chromatography", b.title)
	b.str(s, 1, 2, "Rendered from the lotgate record, which remains the reference copy.", b.note)
	row := 4
	kv := func(k, v string) {
		b.str(s, 1, row, k, b.label)
		b.paragraph(s, row, 2, cols, v, xlSummaryWidths)
		row++
	}
	kv("Product", rec.Report.Product)
	kv("Grade", rec.Report.Grade)
	kv("Site", rec.Report.Site)
	if len(rec.Report.Address) > 0 {
		kv("Address", strings.Join(rec.Report.Address, ", "))
	}
	for _, m := range []struct{ key, label string }{
		{"lot", "Lot"}, {"sample_id", "Sample ID"}, {"sample_type", "Sample type"}, {"injection_time", "Injection time"},
	} {
		if v, ok := b.meta(m.key); ok {
			kv(m.label, v)
		}
	}
	kv("Data file", rec.Provenance.InputFile)
	kv("Method", fmt.Sprintf("%s, revision %d", rec.Method.Name, rec.Method.Revision))
	if rec.Method.Description != "" {
		kv("Method description", rec.Method.Description)
	}
	kv("Processed at (UTC)", rec.Provenance.ProcessedAt)
	row++
	b.str(s, 1, row, "Verdict", b.bold)
	b.str(s, 2, row, xlVerdict(rec), b.statusStyle(rec.Verdict))
	b.check(b.f.MergeCell(s, xlCell(2, row), xlCell(7, row)))
	row += 2
	if rec.Batch != nil {
		row = b.batch(row)
	}

	b.str(s, 1, row, "Specification limits", b.bold)
	row++
	b.headers(s, row, "Limit", "Value expression", "Unrounded value", "Reported", "Minimum", "Maximum", "Unit",
		"Rounding", "Status", "Reason")
	row++
	if len(rec.Limits) == 0 {
		b.str(s, 1, row, "No limits apply to this sample.", b.note)
		row++
	}
	for _, l := range rec.Limits {
		b.str(s, 1, row, l.Name, b.wrap)
		b.str(s, 2, row, l.Expr, b.wrap)
		b.optFloat(s, 3, row, l.Value, b.num("General"))
		b.str(s, 4, row, l.Reported, b.center)
		b.str(s, 5, row, l.Min, b.center)
		b.str(s, 6, row, l.Max, b.center)
		b.str(s, 7, row, l.Unit, b.wrap)
		b.str(s, 8, row, l.Rounding, b.text)
		b.str(s, 9, row, l.Status, b.statusStyle(l.Status))
		b.str(s, 10, row, l.Reason, b.wrap)
		row++
	}
	row++

	b.str(s, 1, row, "Warnings", b.bold)
	row++
	if len(rec.Warnings) == 0 {
		b.str(s, 1, row, "None.", b.text)
		row++
	}
	for _, wn := range rec.Warnings {
		b.paragraph(s, row, 1, cols, wn, xlSummaryWidths)
		row++
	}
	row++

	b.str(s, 1, row, "Sample metadata (as in the data file)", b.bold)
	row++
	b.headers(s, row, "Key", "Value")
	row++
	if len(rec.Sample.Metadata) == 0 {
		b.str(s, 1, row, "None.", b.text)
		row++
	}
	for _, m := range rec.Sample.Metadata {
		b.str(s, 1, row, m.Key, b.text)
		b.paragraph(s, row, 2, cols, m.Value, xlSummaryWidths)
		row++
	}
	row++

	b.str(s, 1, row, "Cautions", b.bold)
	row++
	for _, c := range rec.Report.Cautions {
		b.paragraph(s, row, 1, cols, c, xlSummaryWidths)
		row++
	}
}

// batch writes, from row on, where the injection stands in its sequence
// and the amounts read from the sequence's calibration; it returns the next
// free row.
func (b *xlBook) batch(row int) int {
	const s = xlSheetSummary
	bt := b.rec.Batch
	cols := len(xlSummaryWidths)
	b.str(s, 1, row, "Sequence injection", b.bold)
	row++
	kv := func(k, v string) {
		if v != "" {
			b.str(s, 1, row, k, b.label)
			b.paragraph(s, row, 2, cols, v, xlSummaryWidths)
			row++
		}
	}
	kv("Sequence file", bt.SequenceFile)
	b.str(s, 1, row, "Injection", b.label)
	b.integer(s, 2, row, bt.Injection, b.numLeft)
	row++
	kv("Injection label", bt.ID)
	kv("Role", bt.Role)
	kv("Standard", bt.Standard)
	kv("Lot", bt.Lot)
	kv("Sample ID", bt.SampleID)
	if bt.Replicate != 0 {
		b.str(s, 1, row, "Replicate", b.label)
		b.integer(s, 2, row, bt.Replicate, b.numLeft)
		row++
	}
	if bt.Dilution != 0 {
		b.str(s, 1, row, "Dilution factor", b.label)
		b.float(s, 2, row, bt.Dilution, b.numLeft)
		row++
	}
	b.str(s, 1, row, "Run status", b.label)
	style := b.pass
	if bt.Status != "valid" {
		style = b.fail
	}
	b.str(s, 2, row, bt.Status, style)
	row++
	for _, r := range bt.Reasons {
		kv("Reason", r)
	}
	kv("Lot record", bt.LotRecord)
	if len(bt.Amounts) > 0 {
		row++
		b.str(s, 1, row, "Amounts from the calibration", b.bold)
		row++
		b.headers(s, row, "Component", "Response", "Amount", "Unit", "In calibrated range", "Note")
		b.check(b.f.SetRowHeight(s, row, 30))
		row++
		for _, a := range bt.Amounts {
			b.str(s, 1, row, a.Component, b.wrap)
			b.optFloat(s, 2, row, a.Response, b.num("0.000"))
			b.optFloat(s, 3, row, a.Amount, b.num("0.000"))
			b.str(s, 4, row, a.Unit, b.center)
			b.str(s, 5, row, xlYesNo(a.InRange, "no"), b.center)
			b.paragraph(s, row, 6, cols, a.Note, xlSummaryWidths)
			row++
		}
	}
	return row + 1
}

// Peaks sheet columns: header and number format (text columns have none).
var xlPeakCols = []struct{ name, format string }{
	{"No.", "0"}, {"Name", ""}, {"Component", ""}, {"Retention time (min)", "0.000"},
	{"Start (min)", "0.000"}, {"End (min)", "0.000"}, {"Boundary", ""},
	{"Peak area (%s)", "0.000"}, {"Height (%s)", "0.000"}, {"Half-height width (min)", "0.0000"},
	{"5 % width (min)", "0.0000"}, {"Tailing factor", "0.00"}, {"Plate number", "0"},
	{"Signal-to-noise", "0.0"}, {"Resolution", "0.00"}, {"Percent (%)", "0.0000"}, {"Reported", ""},
}

func (b *xlBook) peaks() {
	const s = xlSheetPeaks
	b.page(s, true)
	names := make([]string, len(xlPeakCols))
	for i, c := range xlPeakCols {
		names[i] = c.name
	}
	names[7] = fmt.Sprintf(names[7], b.areaUnit())
	names[8] = fmt.Sprintf(names[8], b.signalUnit())
	b.headers(s, 1, names...)
	b.freeze(s)
	nameWidth := 16.0
	for _, p := range b.rec.Peaks {
		nameWidth = max(nameWidth, xlTextWidth(p.Name, 60), xlTextWidth(p.Component, 60))
	}
	b.widths(s, 6, nameWidth, nameWidth, 11, 10, 10, 11, 13, 12, 12, 11, 9, 10, 10, 10, 11, 19)
	b.check(b.f.SetRowHeight(s, 1, 32))
	if len(b.rec.Peaks) == 0 {
		b.str(s, 1, 2, "No peaks were detected.", b.note)
		return
	}
	for i, p := range b.rec.Peaks {
		row := i + 2
		st := func(col int) int { return b.num(xlPeakCols[col-1].format) }
		b.integer(s, 1, row, p.Number, st(1))
		b.str(s, 2, row, p.Name, b.wrap)
		b.str(s, 3, row, p.Component, b.wrap)
		b.float(s, 4, row, p.RTMin, st(4))
		b.float(s, 5, row, p.StartMin, st(5))
		b.float(s, 6, row, p.EndMin, st(6))
		b.str(s, 7, row, p.Boundary, b.center)
		b.float(s, 8, row, p.Area, st(8))
		b.float(s, 9, row, p.Height, st(9))
		b.optFloat(s, 10, row, p.WidthHalfMin, st(10))
		b.optFloat(s, 11, row, p.Width5Min, st(11))
		b.optFloat(s, 12, row, p.Tailing, st(12))
		b.optFloat(s, 13, row, p.Plates, st(13))
		b.float(s, 14, row, p.SNR, st(14))
		b.optFloat(s, 15, row, p.Resolution, st(15))
		b.optFloat(s, 16, row, p.Percent, st(16))
		if p.Percent != nil {
			b.str(s, 17, row, xlYesNo(p.Reported, "no (below threshold)"), b.text)
		}
	}
}

// xlTextWidth is a column width that shows s, capped at most.
func xlTextWidth(s string, most float64) float64 {
	return math.Min(most, float64(utf8.RuneCountInString(s))+2)
}

func xlYesNo(v bool, no string) string {
	if v {
		return "yes"
	}
	return no
}

func (b *xlBook) components() {
	const s = xlSheetComponents
	rec := b.rec
	b.page(s, true)
	b.headers(s, 1, "Component", "Main", "Expected retention time (min)", "Window (± min)", "Response factor (RRF)",
		"Status", "Peak no.", "Retention time (min)", "Peak area ("+b.areaUnit()+")", "Percent (%)", "Reported",
		"Candidate retention times (min)")
	b.freeze(s)
	nameWidth := 16.0
	for _, c := range rec.Components {
		nameWidth = max(nameWidth, xlTextWidth(c.Name, 60))
	}
	b.widths(s, nameWidth, 7, 13, 10, 11, 13, 8, 11, 13, 11, 19, 24)
	b.check(b.f.SetRowHeight(s, 1, 32))
	row := 2
	if len(rec.Components) == 0 {
		b.str(s, 1, row, "The method declares no components.", b.note)
		row++
	}
	for _, c := range rec.Components {
		b.str(s, 1, row, c.Name, b.wrap)
		b.str(s, 2, row, xlYesNo(c.Main, "no"), b.text)
		b.float(s, 3, row, c.ExpectedRT, b.num("0.000"))
		b.float(s, 4, row, c.WindowMin, b.num("0.000"))
		b.float(s, 5, row, c.RRF, b.num("0.000"))
		b.str(s, 6, row, c.Status, b.text)
		if c.Peak != nil {
			b.integer(s, 7, row, *c.Peak, b.num("0"))
		}
		b.optFloat(s, 8, row, c.RTMin, b.num("0.000"))
		b.optFloat(s, 9, row, c.Area, b.num("0.000"))
		b.optFloat(s, 10, row, c.Percent, b.num("0.0000"))
		if c.Percent != nil {
			b.str(s, 11, row, xlYesNo(c.Reported, "no (below threshold)"), b.text)
		}
		if len(c.Candidates) > 0 {
			rts := make([]string, len(c.Candidates))
			for i, x := range c.Candidates {
				rts[i] = strconv.FormatFloat(x, 'f', -1, 64)
			}
			b.str(s, 12, row, strings.Join(rts, "; "), b.text)
		}
		row++
	}
	t := rec.Totals
	if t == nil {
		return
	}
	row++
	b.str(s, 1, row, "Totals over the reported peaks", b.bold)
	row++
	for _, x := range []struct {
		label string
		v     *float64
	}{
		{"Total impurities (%)", &t.TotalImpurities},
		{"Named impurities (%)", &t.NamedImpurities},
		{"Total unknowns (%)", &t.TotalUnknowns},
		{"Largest unknown (%)", t.LargestUnknown},
		{"Largest impurity (%)", t.LargestImpurity},
	} {
		b.str(s, 1, row, x.label, b.label)
		b.optFloat(s, 3, row, x.v, b.num("0.0000"))
		row++
	}
	b.str(s, 1, row, "Unknown peaks", b.label)
	b.integer(s, 3, row, t.UnknownCount, b.num("0"))
}

// Provenance layout: labels, values, notes.
var xlProvenanceWidths = []float64{30, 66, 40}

func (b *xlBook) provenance() {
	const s = xlSheetProvenance
	rec := b.rec
	p := rec.Provenance
	b.page(s, false)
	b.widths(s, xlProvenanceWidths...)
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
		b.paragraph(s, row, 2, 3, v, xlProvenanceWidths)
		row++
	}
	kvNum := func(k string, v float64) {
		b.str(s, 1, row, k, b.label)
		b.float(s, 2, row, v, b.numLeft)
		row++
	}
	section("Record")
	kv("Schema", rec.Schema)
	kv("Tool", p.Tool)
	kv("Version", p.Version)
	kv("Pipeline file", p.PipelineFile)
	kv("Pipeline SHA-256", p.PipelineSHA256)
	if p.BundleSHA256 != "" {
		kv("Bundle SHA-256", p.BundleSHA256)
	}
	kv("Input file", p.InputFile)
	kv("Input SHA-256", p.InputSHA256)
	kv("Processed at (UTC)", p.ProcessedAt)
	if p.LedgerHead != "" {
		kv("Ledger entry", p.LedgerHead)
	}
	if bt := rec.Batch; bt != nil {
		kv("Sequence file", bt.SequenceFile)
		kv("Sequence SHA-256", bt.SequenceSHA256)
	}
	b.str(s, 1, row, "Record SHA-256", b.label) // the value comes when the digest is ready
	b.digestRow = row
	row++
	b.str(s, 3, row-1, "SHA-256 of the JSON record as lotgate writes it", b.note)

	section("Method")
	kv("Name", rec.Method.Name)
	b.str(s, 1, row, "Revision", b.label)
	b.integer(s, 2, row, rec.Method.Revision, b.numLeft)
	row++
	kv("Description", rec.Method.Description)

	section("Method settings")
	b.headers(s, row, "Step", "Setting", "Value")
	row++
	settings := func(step string, m map[string]any) {
		rows, err := xlSettings(m)
		b.check(err)
		if len(rows) == 0 {
			b.str(s, 1, row, step, b.text)
			b.str(s, 2, row, "(no settings)", b.muted)
			row++
		}
		row = b.settingRows(s, row, step, rows, func() int { return b.numLeft })
	}
	settings("input", rec.Method.Input)
	for i, st := range rec.Method.Steps {
		settings(fmt.Sprintf("%d. %s", i+1, st.Step), st.Settings)
	}

	if n := rec.Noise; n != nil {
		section("Noise estimate")
		u := b.signalUnit()
		kvNum("Standard deviation ("+u+")", n.SD)
		kvNum("Peak-to-peak ("+u+")", n.PeakToPeak)
		kv("Method", n.Method)
		for _, x := range []struct {
			label string
			v     *float64
		}{{"Window from (min)", n.FromMin}, {"Window to (min)", n.ToMin}, {"Block length (min)", n.BlockMin}} {
			if x.v != nil {
				kvNum(x.label, *x.v)
			}
		}
	}
	if q := rec.Quant; q != nil {
		section("Quantitation")
		kv("Method", q.Method)
		kvNum("Response factor for unknowns", q.UnknownRRF)
		kvNum("Reporting threshold (%)", q.ReportingThreshold)
		kvNum("Total area divided ("+b.areaUnit()+")", q.TotalArea)
	}

	r := rec.Report
	section("Report settings")
	kv("Formats", strings.Join(r.Formats, ", "))
	xlReportSettings(r, kv)
	for _, c := range r.Cautions {
		kv("Caution", c)
	}
}

// settingRows writes rows of method settings from row on, columns A to C:
// the block (or step) they belong to, the key and the value, a number in
// the style num gives. It returns the next free row.
func (b *xlBook) settingRows(sheet string, row int, block string, rows []xlSetting, num func() int) int {
	for _, r := range rows {
		b.str(sheet, 1, row, block, b.text)
		b.str(sheet, 2, row, r.key, b.text)
		switch v := r.value.(type) {
		case json.Number:
			x, err := v.Float64()
			b.check(err)
			b.float(sheet, 3, row, x, num())
		case string:
			b.str(sheet, 3, row, v, b.text)
		case bool:
			b.str(sheet, 3, row, strconv.FormatBool(v), b.text)
		}
		row++
	}
	return row
}

// xlReportSettings lists, through kv, the report settings that shape the
// documents: site, address, product, grade, paper, signature lines, logo.
func xlReportSettings(r pipeline.ReportSettings, kv func(k, v string)) {
	kv("Site", r.Site)
	for _, a := range r.Address {
		kv("Address", a)
	}
	kv("Product", r.Product)
	kv("Grade", r.Grade)
	kv("Paper", r.Paper)
	for _, sg := range r.Signatures {
		kv("Signature line", sg)
	}
	if r.LogoFile != "" {
		kv("Logo file", r.LogoFile)
		kv("Logo SHA-256", r.LogoSHA256)
	}
}

// xlSetting is one flattened method setting: a key path and a json.Number,
// string or bool.
type xlSetting struct {
	key   string
	value any
}

// xlSettings flattens a settings map into rows in key order: nested maps
// give "outer.inner" keys and lists "key[1]", "key[2]" ... The map goes
// through JSON first, so the values are those the record file holds,
// whatever Go types the map was built from.
func xlSettings(m map[string]any) ([]xlSetting, error) {
	js, err := json.Marshal(m)
	if err != nil {
		return nil, fmt.Errorf("method settings: %w", err)
	}
	dec := json.NewDecoder(bytes.NewReader(js))
	dec.UseNumber()
	var v any
	if err := dec.Decode(&v); err != nil {
		return nil, fmt.Errorf("method settings: %w", err)
	}
	var out []xlSetting
	var walk func(key string, v any)
	walk = func(key string, v any) {
		switch x := v.(type) {
		case map[string]any:
			if len(x) == 0 && key != "" {
				out = append(out, xlSetting{key, "(none)"})
			}
			keys := make([]string, 0, len(x))
			for k := range x {
				keys = append(keys, k)
			}
			slices.Sort(keys)
			for _, k := range keys {
				sub := k
				if key != "" {
					sub = key + "." + k
				}
				walk(sub, x[k])
			}
		case []any:
			if len(x) == 0 {
				out = append(out, xlSetting{key, "(none)"})
			}
			for i, e := range x {
				walk(fmt.Sprintf("%s[%d]", key, i+1), e)
			}
		case nil:
			out = append(out, xlSetting{key, "null"})
		default:
			out = append(out, xlSetting{key, x})
		}
	}
	walk("", v)
	return out, nil
}

// traceColumns lists the trace's signals with their headers.
func (b *xlBook) traceColumns() (names []string, cols [][]float64) {
	tr, u := b.rec.Trace, " ("+b.signalUnit()+")"
	names, cols = []string{"Raw signal" + u}, [][]float64{tr.Raw}
	if len(tr.Processed) > 0 {
		names, cols = append(names, "Processed signal"+u), append(cols, tr.Processed)
	}
	if len(tr.Baseline) > 0 {
		names, cols = append(names, "Baseline"+u), append(cols, tr.Baseline)
	}
	return names, cols
}

// trace streams the trace to its sheet, one row per point. The stream
// writer cuts numbers to 15 significant digits (the precision a
// spreadsheet keeps); the record holds the full values.
func (b *xlBook) trace() {
	const s = xlSheetTrace
	if b.err != nil {
		return
	}
	tr := b.rec.Trace
	if tr == nil || tr.Points == 0 {
		b.str(s, 1, 1, "The record holds no trace.", b.note)
		return
	}
	sw, err := b.f.NewStreamWriter(s)
	if err != nil {
		b.check(err)
		return
	}
	names, cols := b.traceColumns()
	ncol := 1 + len(cols)
	b.check(sw.SetColWidth(1, 1, 11))
	b.check(sw.SetColWidth(2, ncol, 17))
	b.check(sw.SetColStyle(1, 1, b.num("0.00000")))
	b.check(sw.SetColStyle(2, ncol, b.num("0.0000")))
	b.check(sw.SetPanes(&excelize.Panes{Freeze: true, YSplit: 1, TopLeftCell: "A2", ActivePane: "bottomLeft"}))
	row := make([]any, ncol)
	row[0] = excelize.Cell{StyleID: b.header, Value: "Time (min)"}
	for i, n := range names {
		row[i+1] = excelize.Cell{StyleID: b.header, Value: n}
	}
	b.check(sw.SetRow("A1", row, excelize.RowOpts{Height: 30}))
	for i := 0; i < tr.Points && b.err == nil; i++ {
		row[0] = tr.StartMin + float64(i)*tr.IntervalMin
		for j, c := range cols {
			row[j+1] = c[i]
		}
		b.check(sw.SetRow("A"+strconv.Itoa(i+2), row))
	}
	b.check(sw.Flush())
}

// xlChartRows picks the trace points the charts draw: all of them for a
// short trace; otherwise, for each of xlChartBuckets equal runs of points,
// the lowest and the highest point of signal, in time order, so that
// every apex and every valley stays on the chart.
func xlChartRows(signal []float64) []int {
	n := len(signal)
	if n <= 2*xlChartBuckets {
		idx := make([]int, n)
		for i := range idx {
			idx[i] = i
		}
		return idx
	}
	idx := make([]int, 0, 2*xlChartBuckets)
	for k := range xlChartBuckets {
		lo, hi := k*n/xlChartBuckets, (k+1)*n/xlChartBuckets
		imin, imax := lo, lo
		for i := lo + 1; i < hi; i++ {
			if signal[i] < signal[imin] {
				imin = i
			}
			if signal[i] > signal[imax] {
				imax = i
			}
		}
		first, second := min(imin, imax), max(imin, imax)
		idx = append(idx, first)
		if second != first {
			idx = append(idx, second)
		}
	}
	return idx
}

// charts writes the chart data sheet and draws the chromatogram: the whole
// trace, and, when the largest peak dwarfs the others, a second chart
// scaled to the smaller peaks.
func (b *xlBook) charts() {
	const s = xlSheetChromatogram
	tr := b.rec.Trace
	if b.err != nil {
		return
	}
	b.page(s, true)
	if tr == nil || tr.Points == 0 {
		b.str(s, 1, 1, "The record holds no trace to chart.", b.note)
		return
	}
	signal, name := tr.Raw, "Raw signal"
	if len(tr.Processed) > 0 {
		signal, name = tr.Processed, "Processed signal"
	}
	u := " (" + b.signalUnit() + ")"
	idx := xlChartRows(signal)

	const d = xlSheetChartData
	b.widths(d, 11, 17, 17, 11)
	hdr := []string{"Time (min)", name + u}
	if len(tr.Baseline) > 0 {
		hdr = append(hdr, "Baseline"+u)
	}
	b.headers(d, 1, append(hdr, "Trace point")...)
	b.freeze(d)
	lo := math.Inf(1) // the chart's lowest point
	for r, i := range idx {
		b.float(d, 1, r+2, tr.StartMin+float64(i)*tr.IntervalMin, b.num("0.00000"))
		b.float(d, 2, r+2, signal[i], b.num("0.0000"))
		lo = math.Min(lo, signal[i])
		if len(tr.Baseline) > 0 {
			b.float(d, 3, r+2, tr.Baseline[i], b.num("0.0000"))
			lo = math.Min(lo, tr.Baseline[i])
		}
		b.integer(d, len(hdr)+1, r+2, i+1, b.num("0"))
	}
	b.check(b.f.SetSheetVisible(d, false))

	last := len(idx) + 1
	ref := func(col string) string { return fmt.Sprintf("'%s'!$%s$2:$%s$%d", d, col, col, last) }
	series := []excelize.ChartSeries{{
		Name: fmt.Sprintf("'%s'!$B$1", d), Categories: ref("A"), Values: ref("B"),
		Line:   excelize.LineOptions{Type: excelize.LineSolid, Width: 1},
		Marker: excelize.ChartMarker{Symbol: "none"},
	}}
	if len(tr.Baseline) > 0 {
		series = append(series, excelize.ChartSeries{
			Name: fmt.Sprintf("'%s'!$C$1", d), Categories: ref("A"), Values: ref("C"),
			Line:   excelize.LineOptions{Type: excelize.LineSolid, Width: 1, Dash: excelize.LineDashDash},
			Marker: excelize.ChartMarker{Symbol: "none"},
		})
	}
	t0 := tr.StartMin
	t1 := tr.StartMin + float64(tr.Points-1)*tr.IntervalMin
	chart := func(title string, ymin, ymax *float64) *excelize.Chart {
		c := &excelize.Chart{
			Type:      excelize.Scatter,
			Series:    series,
			Title:     excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: title}}},
			Legend:    excelize.ChartLegend{Position: "bottom"},
			Dimension: excelize.ChartDimension{Width: 960, Height: 400},
			XAxis: excelize.ChartAxis{MajorGridLines: true,
				Title: excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: "Time (min)"}}}},
			YAxis: excelize.ChartAxis{MajorGridLines: true, Minimum: ymin, Maximum: ymax,
				Title: excelize.ChartTitle{Paragraph: []excelize.RichTextRun{{Text: "Signal" + u}}}},
		}
		if t1 > t0 {
			c.XAxis.Minimum, c.XAxis.Maximum = &t0, &t1
		}
		return c
	}
	title := "Chromatogram"
	if lot, ok := b.meta("lot"); ok {
		title += " — lot " + lot
	}
	b.str(s, 1, 1, "Charts of the trace; a long trace is drawn from the lowest and highest point of each of "+
		strconv.Itoa(xlChartBuckets)+" equal runs of points (hidden sheet \""+d+"\").", b.note)
	b.check(b.f.AddChart(s, "A3", chart(title, nil, nil)))
	// The second chart starts below the first (400 px are 20 default
	// rows), on a page of its own.
	if top, ok := b.smallPeakTop(signal); ok && top > lo {
		ymin, ymax := xlNiceRange(lo, top+0.1*(top-lo))
		b.check(b.f.InsertPageBreak(s, "A25"))
		b.check(b.f.AddChart(s, "A26", chart(title+", scaled to the smaller peaks", &ymin, &ymax)))
	}
}

// smallPeakTop is the highest signal inside the boundaries of any peak but
// the tallest, when the tallest peak is more than twenty times higher than
// every other; the second chart is scaled to it.
func (b *xlBook) smallPeakTop(signal []float64) (float64, bool) {
	peaks, tr := b.rec.Peaks, b.rec.Trace
	if len(peaks) < 2 || tr.IntervalMin <= 0 {
		return 0, false
	}
	tallest := 0
	for i, p := range peaks {
		if p.Height > peaks[tallest].Height {
			tallest = i
		}
	}
	top, second := math.Inf(-1), 0.0
	for i, p := range peaks {
		if i == tallest {
			continue
		}
		second = math.Max(second, p.Height)
		from := max(0, int(math.Ceil((p.StartMin-tr.StartMin)/tr.IntervalMin)))
		to := min(len(signal)-1, int(math.Floor((p.EndMin-tr.StartMin)/tr.IntervalMin)))
		for j := from; j <= to; j++ {
			top = math.Max(top, signal[j])
		}
	}
	if math.IsInf(top, -1) || 20*second >= peaks[tallest].Height {
		return 0, false
	}
	return top, true
}

// xlNiceRange widens [lo, hi] to whole steps of a power of ten, for readable
// axis labels.
func xlNiceRange(lo, hi float64) (float64, float64) {
	step := math.Pow(10, math.Floor(math.Log10(hi-lo)))
	return math.Floor(lo/step) * step, math.Ceil(hi/step) * step
}

func (b *xlBook) docProps(at time.Time) {
	rec := b.rec
	title := rec.Report.Product
	if lot, ok := b.meta("lot"); ok {
		title = strings.TrimSpace(title + " — lot " + lot)
	}
	stamp := at.Format("2006-01-02T15:04:05Z")
	b.check(b.f.SetDocProps(&excelize.DocProperties{
		Title:       title,
		Subject:     "Release results by gas chromatography",
		Creator:     strings.TrimSpace(rec.Provenance.Tool + " " + rec.Provenance.Version),
		Description: "Rendered from the record of " + rec.Provenance.InputFile,
		Created:     stamp,
		Modified:    stamp,
	}))
}

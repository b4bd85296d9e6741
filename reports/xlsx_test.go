package reports

import (
	"archive/zip"
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/csv"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"maps"
	"math"
	"os"
	"os/exec"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"

	"lotgate/pipeline"
)

// xlsxRunTime is the processing time of the demo records (a fixed
// SOURCE_DATE_EPOCH, 2026-12-01T00:00:00Z).
var xlsxRunTime = time.Unix(1796083200, 0)

var xlsxDemo = struct {
	sync.Mutex
	recs map[string]*pipeline.Record
}{recs: map[string]*pipeline.Record{}}

// xlsxDemoRecord processes one of the demo data files with the demo
// pipeline (once per test binary).
func xlsxDemoRecord(t testing.TB, name string) *pipeline.Record {
	t.Helper()
	xlsxDemo.Lock()
	defer xlsxDemo.Unlock()
	if rec, ok := xlsxDemo.recs[name]; ok {
		return rec
	}
	p, err := pipeline.Load(filepath.Join("..", "examples", "toluene-release.hcl"))
	if err != nil {
		t.Fatal(err)
	}
	rec, err := p.ProcessFile(context.Background(), filepath.Join("..", "examples", "data", name), xlsxRunTime)
	if err != nil {
		t.Fatal(err)
	}
	xlsxDemo.recs[name] = rec
	return rec
}

func xlsxRender(t testing.TB, rec *pipeline.Record) []byte {
	t.Helper()
	var b bytes.Buffer
	if err := WriteXLSX(&b, rec); err != nil {
		t.Fatalf("WriteXLSX: %v", err)
	}
	return b.Bytes()
}

// xlsxOpen reads a rendered workbook back.
type xlsxBook struct {
	t *testing.T
	f *excelize.File
}

func xlsxOpen(t *testing.T, data []byte) *xlsxBook {
	t.Helper()
	f, err := excelize.OpenReader(bytes.NewReader(data))
	if err != nil {
		t.Fatalf("the workbook does not open: %v", err)
	}
	t.Cleanup(func() { f.Close() })
	return &xlsxBook{t, f}
}

// get is the raw (unformatted) value of a cell.
func (x *xlsxBook) get(sheet string, col, row int) string {
	x.t.Helper()
	v, err := x.f.GetCellValue(sheet, xlCell(col, row), excelize.Options{RawCellValue: true})
	if err != nil {
		x.t.Fatalf("%s!%s: %v", sheet, xlCell(col, row), err)
	}
	return v
}

// wantText checks a text cell.
func (x *xlsxBook) wantText(sheet string, col, row int, want string) {
	x.t.Helper()
	if got := x.get(sheet, col, row); got != want {
		x.t.Errorf("%s!%s = %q, want %q", sheet, xlCell(col, row), got, want)
	}
}

// wantNum checks that a cell is a number cell holding exactly want.
func (x *xlsxBook) wantNum(sheet string, col, row int, want float64) {
	x.t.Helper()
	ref := xlCell(col, row)
	typ, err := x.f.GetCellType(sheet, ref)
	if err != nil {
		x.t.Fatal(err)
	}
	if typ != excelize.CellTypeUnset && typ != excelize.CellTypeNumber {
		x.t.Errorf("%s!%s is not a number cell (type %v)", sheet, ref, typ)
		return
	}
	got, err := strconv.ParseFloat(x.get(sheet, col, row), 64)
	if err != nil || got != want {
		x.t.Errorf("%s!%s = %q, want the number %v", sheet, ref, x.get(sheet, col, row), want)
	}
}

// wantOpt checks an optional figure: a number, or an empty cell for nil.
func (x *xlsxBook) wantOpt(sheet string, col, row int, want *float64) {
	x.t.Helper()
	if want == nil {
		x.wantText(sheet, col, row, "")
		return
	}
	x.wantNum(sheet, col, row, *want)
}

// findRow returns the first row whose column col holds text, or 0.
func (x *xlsxBook) findRow(sheet string, col int, text string) int {
	x.t.Helper()
	rows, err := x.f.GetRows(sheet, excelize.Options{RawCellValue: true})
	if err != nil {
		x.t.Fatal(err)
	}
	for i, r := range rows {
		if len(r) >= col && r[col-1] == text {
			return i + 1
		}
	}
	return 0
}

// label returns the value beside a label in column A of a key/value block.
func (x *xlsxBook) label(sheet, label string) string {
	x.t.Helper()
	row := x.findRow(sheet, 1, label)
	if row == 0 {
		x.t.Errorf("%s: no row labelled %q", sheet, label)
		return ""
	}
	return x.get(sheet, 2, row)
}

// metaValue is a metadata value of the record.
func metaValue(rec *pipeline.Record, key string) string {
	for _, m := range rec.Sample.Metadata {
		if m.Key == key {
			return m.Value
		}
	}
	return ""
}

// checkRoundTrip reads the workbook back with excelize's reader and
// compares every value it shows with the record, the contract the workbook
// renders (pipeline/record.go): text cells equal the record's strings and
// number cells hold the record's float64 exactly.
func checkRoundTrip(t *testing.T, rec *pipeline.Record, data []byte) {
	t.Helper()
	x := xlsxOpen(t, data)

	if got, want := x.f.GetSheetList(), []string{xlSheetSummary, xlSheetChromatogram, xlSheetPeaks, xlSheetComponents,
		xlSheetProvenance, xlSheetTrace, xlSheetChartData}; rec.Trace != nil && !slices.Equal(got, want) {
		t.Errorf("sheets %q, want %q", got, want)
	}

	// Summary: identification, limits, warnings, metadata, cautions.
	s := xlSheetSummary
	for label, want := range map[string]string{
		"Product": rec.Report.Product, "Grade": rec.Report.Grade, "Site": rec.Report.Site,
		"Data file": rec.Provenance.InputFile, "Processed at (UTC)": rec.Provenance.ProcessedAt,
		"Method": fmt.Sprintf("%s, revision %d", rec.Method.Name, rec.Method.Revision),
	} {
		if got := x.label(s, label); got != want {
			t.Errorf("Summary %s = %q, want %q", label, got, want)
		}
	}
	for key, label := range map[string]string{"lot": "Lot", "sample_id": "Sample ID", "sample_type": "Sample type",
		"injection_time": "Injection time"} {
		if want := metaValue(rec, key); want != "" && x.label(s, label) != want {
			t.Errorf("Summary %s = %q, want %q", label, x.label(s, label), want)
		}
	}
	if bt := rec.Batch; bt != nil {
		for label, want := range map[string]string{"Sequence file": bt.SequenceFile, "Role": bt.Role,
			"Run status": bt.Status, "Lot record": bt.LotRecord} {
			if got := x.label(s, label); got != want {
				t.Errorf("Summary %s = %q, want %q", label, got, want)
			}
		}
		x.wantNum(s, 2, x.findRow(s, 1, "Injection"), float64(bt.Injection))
		for _, r := range bt.Reasons {
			if x.findRow(s, 2, r) == 0 {
				t.Errorf("Summary: reason %q missing", r)
			}
		}
		am := x.findRow(s, 1, "Component")
		for i, a := range bt.Amounts {
			x.wantText(s, 1, am+1+i, a.Component)
			x.wantOpt(s, 2, am+1+i, a.Response)
			x.wantOpt(s, 3, am+1+i, a.Amount)
			x.wantText(s, 4, am+1+i, a.Unit)
			x.wantText(s, 6, am+1+i, a.Note)
		}
		if got := x.label(xlSheetProvenance, "Sequence SHA-256"); got != bt.SequenceSHA256 {
			t.Errorf("Provenance sequence digest %q, want %q", got, bt.SequenceSHA256)
		}
	}
	head := x.findRow(s, 1, "Limit")
	if head == 0 {
		t.Fatal("Summary: no limits table")
	}
	for i, l := range rec.Limits {
		r := head + 1 + i
		x.wantText(s, 1, r, l.Name)
		x.wantText(s, 2, r, l.Expr)
		x.wantOpt(s, 3, r, l.Value)
		x.wantText(s, 4, r, l.Reported)
		x.wantText(s, 5, r, l.Min)
		x.wantText(s, 6, r, l.Max)
		x.wantText(s, 7, r, l.Unit)
		x.wantText(s, 8, r, l.Rounding)
		x.wantText(s, 9, r, l.Status)
		x.wantText(s, 10, r, l.Reason)
	}
	for _, w := range rec.Warnings {
		if x.findRow(s, 1, w) == 0 {
			t.Errorf("Summary: warning %q missing", w)
		}
	}
	meta := x.findRow(s, 1, "Key")
	for i, m := range rec.Sample.Metadata {
		x.wantText(s, 1, meta+1+i, m.Key)
		x.wantText(s, 2, meta+1+i, m.Value)
	}
	for _, c := range rec.Report.Cautions {
		if x.findRow(s, 1, c) == 0 {
			t.Errorf("Summary: caution %q missing", c)
		}
	}

	// Peaks: one row per peak, every figure a number equal to the record's.
	p := xlSheetPeaks
	area := rec.Units.Area
	if area == "" {
		area = "signal·s" // the header names a unit even when the record has none
	}
	x.wantText(p, 8, 1, "Peak area ("+area+")")
	for i, pk := range rec.Peaks {
		r := i + 2
		x.wantNum(p, 1, r, float64(pk.Number))
		x.wantText(p, 2, r, pk.Name)
		x.wantText(p, 3, r, pk.Component)
		x.wantNum(p, 4, r, pk.RTMin)
		x.wantNum(p, 5, r, pk.StartMin)
		x.wantNum(p, 6, r, pk.EndMin)
		x.wantText(p, 7, r, pk.Boundary)
		x.wantNum(p, 8, r, pk.Area)
		x.wantNum(p, 9, r, pk.Height)
		x.wantOpt(p, 10, r, pk.WidthHalfMin)
		x.wantOpt(p, 11, r, pk.Width5Min)
		x.wantOpt(p, 12, r, pk.Tailing)
		x.wantOpt(p, 13, r, pk.Plates)
		x.wantNum(p, 14, r, pk.SNR)
		x.wantOpt(p, 15, r, pk.Resolution)
		x.wantOpt(p, 16, r, pk.Percent)
		if pk.Percent != nil {
			x.wantText(p, 17, r, map[bool]string{true: "yes", false: "no (below threshold)"}[pk.Reported])
		}
	}
	if rows, _ := x.f.GetRows(p); len(rec.Peaks) > 0 && len(rows) != len(rec.Peaks)+1 {
		t.Errorf("Peaks has %d rows, want %d", len(rows), len(rec.Peaks)+1)
	}

	// Components.
	c := xlSheetComponents
	for i, cp := range rec.Components {
		r := i + 2
		x.wantText(c, 1, r, cp.Name)
		x.wantText(c, 2, r, map[bool]string{true: "yes", false: "no"}[cp.Main])
		x.wantNum(c, 3, r, cp.ExpectedRT)
		x.wantNum(c, 4, r, cp.WindowMin)
		x.wantNum(c, 5, r, cp.RRF)
		x.wantText(c, 6, r, cp.Status)
		if cp.Peak != nil {
			x.wantNum(c, 7, r, float64(*cp.Peak))
		}
		x.wantOpt(c, 8, r, cp.RTMin)
		x.wantOpt(c, 9, r, cp.Area)
		x.wantOpt(c, 10, r, cp.Percent)
	}
	if tot := rec.Totals; tot != nil {
		r := x.findRow(c, 1, "Total impurities (%)")
		x.wantNum(c, 3, r, tot.TotalImpurities)
		x.wantNum(c, 3, r+1, tot.NamedImpurities)
		x.wantNum(c, 3, r+2, tot.TotalUnknowns)
		x.wantOpt(c, 3, r+3, tot.LargestUnknown)
		x.wantOpt(c, 3, r+4, tot.LargestImpurity)
		x.wantNum(c, 3, r+5, float64(tot.UnknownCount))
	}

	// Provenance: digests, the record's own digest (the SHA-256 of the
	// bytes `lotgate run` writes, rec.Marshal()), processed_at.
	v := xlSheetProvenance
	js, err := rec.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	sum := sha256.Sum256(js)
	for label, want := range map[string]string{
		"Pipeline SHA-256": rec.Provenance.PipelineSHA256, "Input SHA-256": rec.Provenance.InputSHA256,
		"Record SHA-256": hex.EncodeToString(sum[:]), "Processed at (UTC)": rec.Provenance.ProcessedAt,
		"Pipeline file": rec.Provenance.PipelineFile, "Input file": rec.Provenance.InputFile,
		"Tool": rec.Provenance.Tool, "Version": rec.Provenance.Version, "Schema": rec.Schema,
	} {
		if got := x.label(v, label); got != want {
			t.Errorf("Provenance %s = %q, want %q", label, got, want)
		}
	}
	if h := rec.Provenance.BundleSHA256; h != "" && x.label(v, "Bundle SHA-256") != h {
		t.Errorf("Provenance bundle digest %q, want %q", x.label(v, "Bundle SHA-256"), h)
	}
	if h := rec.Provenance.LedgerHead; h != "" && x.label(v, "Ledger entry") != h {
		t.Errorf("Provenance ledger entry %q, want %q", x.label(v, "Ledger entry"), h)
	}
	labelNum := func(label string, want float64) {
		t.Helper()
		if r := x.findRow(v, 1, label); r == 0 {
			t.Errorf("Provenance: no row %q", label)
		} else {
			x.wantNum(v, 2, r, want)
		}
	}
	if n := rec.Noise; n != nil {
		labelNum("Standard deviation ("+rec.Units.Signal+")", n.SD)
		labelNum("Peak-to-peak ("+rec.Units.Signal+")", n.PeakToPeak)
	}
	if q := rec.Quant; q != nil {
		labelNum("Response factor for unknowns", q.UnknownRRF)
		labelNum("Reporting threshold (%)", q.ReportingThreshold)
		labelNum("Total area divided ("+rec.Units.Area+")", q.TotalArea)
	}
	for _, cau := range rec.Report.Cautions {
		if x.findRow(v, 2, cau) == 0 {
			t.Errorf("Provenance: caution %q missing", cau)
		}
	}

	// Trace: one row per point after the header.
	tr := rec.Trace
	if tr == nil {
		return
	}
	rows, err := x.f.Rows(xlSheetTrace)
	if err != nil {
		t.Fatal(err)
	}
	n := 0
	var first, last []string
	for rows.Next() {
		n++
		cols, err := rows.Columns(excelize.Options{RawCellValue: true})
		if err != nil {
			t.Fatal(err)
		}
		if n == 2 {
			first = cols
		}
		last = cols
	}
	rows.Close()
	if n != tr.Points+1 {
		t.Fatalf("Trace has %d rows, want %d points and a header", n, tr.Points)
	}
	if tr.Points == 0 {
		return
	}
	wantRow := func(name string, got []string, i int) {
		want := []float64{tr.StartMin + float64(i)*tr.IntervalMin, tr.Raw[i]}
		if len(tr.Processed) > 0 {
			want = append(want, tr.Processed[i])
		}
		if len(tr.Baseline) > 0 {
			want = append(want, tr.Baseline[i])
		}
		if len(got) != len(want) {
			t.Fatalf("Trace %s row %q, want %v", name, got, want)
		}
		for j, w := range want {
			g, err := strconv.ParseFloat(got[j], 64)
			// The stream writer keeps 15 significant digits, the
			// precision a spreadsheet shows (common practice): the
			// relative error is below 1e-14.
			if err != nil || math.Abs(g-w) > 1e-14*math.Abs(w) {
				t.Errorf("Trace %s row, column %d = %q, want %v", name, j+1, got[j], w)
			}
		}
	}
	wantRow("first", first, 0)
	wantRow("last", last, tr.Points-1)
}

func TestXLSXDemoRecords(t *testing.T) {
	tests := []struct {
		file, verdict string
		fill          string
		charts        int
	}{
		// The demo scenario (examples/toluene-release.hcl and the data
		// examples/synth makes): a passing lot, a lot with ethylbenzene
		// over its limit, and a blank; the lots have impurity peaks
		// far smaller than the toluene peak, so a second, scaled chart.
		{"T998-26-1141.csv", "PASS — all limits met", xlFillPass, 2},
		{"T998-26-1142.csv", "FAIL — 1 limit not met", xlFillFail, 2},
		{"blank-26-1141.csv", "PASS — all limits met", xlFillPass, 1},
	}
	for _, tc := range tests {
		t.Run(tc.file, func(t *testing.T) {
			rec := xlsxDemoRecord(t, tc.file)
			data := xlsxRender(t, rec)
			checkRoundTrip(t, rec, data)
			x := xlsxOpen(t, data)
			r := x.findRow(xlSheetSummary, 1, "Verdict")
			x.wantText(xlSheetSummary, 2, r, tc.verdict)
			style, err := x.f.GetCellStyle(xlSheetSummary, xlCell(2, r))
			if err != nil {
				t.Fatal(err)
			}
			st, err := x.f.GetStyle(style)
			if err != nil || len(st.Fill.Color) != 1 || !strings.EqualFold("#"+st.Fill.Color[0], tc.fill) {
				t.Errorf("verdict fill %+v, want %s", st.Fill, tc.fill)
			}
			zr, err := zip.NewReader(bytes.NewReader(data), int64(len(data)))
			if err != nil {
				t.Fatal(err)
			}
			charts := 0
			for _, f := range zr.File {
				if strings.HasPrefix(f.Name, "xl/charts/chart") {
					charts++
				}
			}
			if charts != tc.charts {
				t.Errorf("%d charts, want %d", charts, tc.charts)
			}
			if visible, _ := x.f.GetSheetVisible(xlSheetChartData); visible {
				t.Error("the chart data sheet is visible")
			}
		})
	}
}

func TestXLSXMethodSettings(t *testing.T) {
	rec := xlsxDemoRecord(t, "T998-26-1141.csv")
	x := xlsxOpen(t, xlsxRender(t, rec))
	rows, err := x.f.GetRows(xlSheetProvenance, excelize.Options{RawCellValue: true})
	if err != nil {
		t.Fatal(err)
	}
	got := map[[2]string]string{}
	for _, r := range rows {
		if len(r) == 3 {
			got[[2]string{r[0], r[1]}] = r[2]
		}
	}
	// The settings written in examples/toluene-release.hcl, and defaults
	// the record lists beside them.
	for _, tc := range []struct{ step, key, want string }{
		{"input", "signal_unit", "pA"},
		{"1. smooth", "method", "savitzky-golay"},
		{"1. smooth", "window", "11"},
		{"1. smooth", "order", "2"},
		{"2. baseline", "lambda", "100000000"},
		{"2. baseline", "asymmetry", "0.001"},
		{"3. detect", "min_snr", "10"},
		{"3. detect", "ignore[1].from", "0"},
		{"3. detect", "ignore[1].to", "1.5"},
		{"4. integrate", "constants", "pharmacopoeia"},
		{"5. identify", "component toluene.rt", "6.4"},
		{"5. identify", "component toluene.main", "true"},
		{"5. identify", "component o-xylene.rrf", "0.97"},
		{"6. quantify", "reporting_threshold", "0.005"},
	} {
		if g := got[[2]string{tc.step, tc.key}]; g != tc.want {
			t.Errorf("setting %s %s = %q, want %q", tc.step, tc.key, g, tc.want)
		}
	}
	// Every leaf setting in the record file has its row.
	var doc struct {
		Method struct {
			Input map[string]any `json:"input"`
			Steps []struct {
				Step     string         `json:"step"`
				Settings map[string]any `json:"settings"`
			} `json:"steps"`
		} `json:"method"`
	}
	js, err := rec.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	if err := json.Unmarshal(js, &doc); err != nil {
		t.Fatal(err)
	}
	perStep := map[string]int{}
	for _, r := range rows {
		if len(r) >= 2 && r[0] != "Step" && (r[0] == "input" || strings.Contains(r[0], ". ")) {
			perStep[r[0]]++
		}
	}
	want := map[string]int{"input": xlsxLeaves(doc.Method.Input)}
	for i, st := range doc.Method.Steps {
		want[fmt.Sprintf("%d. %s", i+1, st.Step)] = xlsxLeaves(st.Settings)
	}
	if !maps.Equal(perStep, want) {
		t.Errorf("setting rows per step %v, want %v", perStep, want)
	}
}

// xlsxLeaves counts the scalar values in a decoded JSON value.
func xlsxLeaves(v any) int {
	switch x := v.(type) {
	case map[string]any:
		n := 0
		for _, e := range x {
			n += xlsxLeaves(e)
		}
		return n
	case []any:
		n := 0
		for _, e := range x {
			n += xlsxLeaves(e)
		}
		return n
	}
	return 1
}

// xlsxSynthetic builds a record from scratch: n peaks on a trace of
// points samples, with figures that need all 17 significant digits, null
// figures, every component status, every limit status, and the given names.
func xlsxSynthetic(n, points int, sample, peakName string) *pipeline.Record {
	f := func(x float64) *float64 { return &x }
	rec := &pipeline.Record{
		Schema: pipeline.Schema,
		Provenance: pipeline.Provenance{Tool: "lotgate", Version: "0.0.0-test", PipelineFile: "synthetic.hcl",
			PipelineSHA256: strings.Repeat("ab", 32), InputFile: sample + ".csv", InputSHA256: strings.Repeat("cd", 32),
			ProcessedAt: "2027-03-04T05:06:07Z", LedgerHead: "42:" + strings.Repeat("ef", 32)},
		Sample: pipeline.Sample{Metadata: []pipeline.MetaRec{
			{Key: "lot", Value: sample}, {Key: "sample_id", Value: sample + "-A"}, {Key: "sample_type", Value: "sample"},
			{Key: "oven", Value: "40 °C → 250 °C"}, {Key: "prüfer", Value: "Jürgen Müß"},
		}},
		Method: pipeline.Method{Name: "synthetic", Revision: 7, Description: "Ölprüfung, µ-scale",
			Input: map[string]any{"signal_unit": "µV", "min_points": 16, "spacing_tolerance": 0.01},
			Steps: []pipeline.StepRec{
				{Step: "smooth", Settings: map[string]any{"window": 9, "order": 2, "method": "savitzky-golay"}},
				{Step: "detect", Settings: map[string]any{"min_snr": 3.3, "ignore": []map[string]any{{"from": 0, "to": 0.5}},
					"flags": []string{}, "nested": map[string]any{"z": true, "a": map[string]any{"deep": 1e-9}}}},
				{Step: "integrate", Settings: map[string]any{}},
			}},
		Units: pipeline.Units{Time: "min", Signal: "µV", Area: "µV·s"},
		Noise: &pipeline.NoiseRec{SD: 0.1 + 0.2, PeakToPeak: 1.0 / 3, Method: "window", FromMin: f(0.5), ToMin: f(1.25)},
		Quant: &pipeline.QuantRec{Method: "area-percent", UnknownRRF: 1, ReportingThreshold: 0.05, TotalArea: 1e6 / 7},
		Totals: &pipeline.Totals{TotalImpurities: 2.0 / 3, NamedImpurities: 0.1, TotalUnknowns: 0.3 + 0.4,
			LargestImpurity: f(1.0 / 9), UnknownCount: n},
		Warnings: []string{"identify: two peaks in the window of \"ü-component\"", strings.Repeat("long warning ", 40)},
		Report: pipeline.ReportSettings{Formats: []string{"json", "xlsx"}, Site: "Prüflabor Süd", Product: "Lösungsmittel µ",
			Grade: "≥ 99.5 %", Paper: "Letter", Signatures: []string{"Analyst"}, Cautions: pipeline.DefaultCautions},
	}
	dt := 30.0 / float64(max(points-1, 1))
	for i := range n {
		rt := 1 + 28*float64(i)/float64(max(n, 1)) + 1e-13*float64(i)
		p := pipeline.PeakRec{Number: i + 1, Name: peakName + " " + strconv.Itoa(i+1), RTMin: rt, StartMin: rt - 0.02,
			EndMin: rt + 0.03, Boundary: "baseline", Area: 1000 / float64(i+3), Height: 100 / float64(i+7),
			WidthHalfMin: f(0.01 + float64(i)/3e4), Width5Min: f(0.02 + float64(i)/7e4), Tailing: f(1 + 1/float64(i+11)),
			Plates: f(1e5 / float64(i+13)), SNR: 1e3 / float64(i+17), Resolution: f(1.5 + 1/float64(i+19)),
			Percent: f(100 / float64(n) * (1 + 1e-15*float64(i))), Reported: i%3 != 2}
		if i == 0 {
			p.Resolution = nil
		}
		if i%5 == 4 {
			p.Tailing, p.Plates, p.Width5Min = nil, nil, nil
		}
		if i%2 == 0 {
			p.Component = p.Name
		}
		rec.Peaks = append(rec.Peaks, p)
	}
	rec.Components = []pipeline.ComponentRec{
		{Name: peakName + " main", Main: true, ExpectedRT: 6.4, WindowMin: 0.08, RRF: 1, Status: "found", Peak: new(int),
			RTMin: f(6.400000000000001), Area: f(12345.678901234567), Percent: f(99.12345678901234), Reported: true},
		{Name: "absent", ExpectedRT: 3.62, WindowMin: 0.05, RRF: 1.01, Status: "not-detected"},
		{Name: "ü-component", ExpectedRT: 9.1, WindowMin: 0.05, RRF: 0.98, Status: "ambiguous", Candidates: []float64{9.08, 9.11}},
	}
	*rec.Components[0].Peak = 1
	rec.Limits = []pipeline.LimitRec{
		{Name: "Purity", Expr: "component.main.percent", Value: f(99.12345678901234), Reported: "99.12", Min: "99.50",
			Digits: 2, Unit: "%", Rounding: "astm-e29", Status: "fail", Reason: "99.12 % is below the minimum 99.50 %"},
		{Name: "Any unknown", Expr: "largest_unknown", Reported: "not detected", Max: "0.10", Digits: 2, Unit: "%",
			Rounding: "half-up", Status: "pass"},
		{Name: "Water", Expr: "meta.water", Digits: 3, Unit: "% (m/m)", Rounding: "absolute", Max: "0.05",
			Status: "error", Reason: "cannot compute: meta.water is not in the data file"},
		{Name: "Total", Expr: "total_impurities", Value: f(0.30000000000000004), Reported: "0.3", Max: "0.2",
			Digits: 1, Rounding: "astm-e29", Status: "fail", Reason: "0.3 is above the maximum 0.2"},
	}
	rec.Verdict = "fail"
	if points > 0 {
		tr := &pipeline.TraceRec{Points: points, StartMin: 0, IntervalMin: dt,
			Raw: make([]float64, points), Processed: make([]float64, points), Baseline: make([]float64, points)}
		for i := range points {
			t := float64(i) * dt
			tr.Baseline[i] = 2 + t/30
			tr.Processed[i] = tr.Baseline[i]
			for _, p := range rec.Peaks {
				d := (t - p.RTMin) / 0.01
				tr.Processed[i] += p.Height * math.Exp(-d*d/2)
			}
			tr.Raw[i] = tr.Processed[i] + 0.01*math.Sin(float64(i))
		}
		rec.Trace = tr
	}
	return rec
}

func TestXLSXSyntheticRecords(t *testing.T) {
	long := strings.Repeat("Lösungsmittel-Charge µ° ", 20)
	tests := []struct {
		name          string
		rec           func() *pipeline.Record
		verdict, peak string
	}{
		{"no peaks, no trace, nothing optional", func() *pipeline.Record {
			return &pipeline.Record{Schema: pipeline.Schema, Verdict: "pass",
				Provenance: pipeline.Provenance{ProcessedAt: "1999-12-31T23:59:59Z"}}
		}, "PASS — no limits apply", "No peaks were detected."},
		{"no peaks with a trace", func() *pipeline.Record { return xlsxSynthetic(0, 300, "L-0", "p") },
			"FAIL — 2 limits not met", "No peaks were detected."},
		{"200 peaks", func() *pipeline.Record { return xlsxSynthetic(200, 6000, "L-200", "peak") },
			"FAIL — 2 limits not met", "peak 1"},
		{"long names", func() *pipeline.Record { return xlsxSynthetic(3, 50, long, long) },
			"FAIL — 2 limits not met", long + " 1"},
		{"unicode", func() *pipeline.Record { return xlsxSynthetic(5, 2001, "Ch-µ°ü", "Xylol µ° ü") },
			"FAIL — 2 limits not met", "Xylol µ° ü 1"},
		{"undetermined", func() *pipeline.Record {
			rec := xlsxSynthetic(2, 10, "L-u", "p")
			rec.Limits = rec.Limits[1:3]
			rec.Verdict = "undetermined"
			return rec
		}, "UNDETERMINED — 1 limit could not be checked", "p 1"},
		{"one point", func() *pipeline.Record { return xlsxSynthetic(1, 1, "L-1", "p") },
			"FAIL — 2 limits not met", "p 1"},
		{"invalid injection of a sequence", func() *pipeline.Record {
			rec := xlsxSynthetic(4, 100, "L-s", "p")
			rec.Limits = rec.Limits[1:2]
			rec.Verdict = "undetermined"
			rec.Provenance.BundleSHA256 = strings.Repeat("12", 32)
			amount, response := 64.00057380418822, 0.1+0.7
			rec.Batch = &pipeline.BatchRec{SequenceFile: "night.sequence.hcl", SequenceSHA256: strings.Repeat("9f", 32),
				Injection: 12, ID: "12", Role: "sample", Lot: "L-s", SampleID: "L-s-A", Replicate: 1, Dilution: 1.5,
				Amounts: []pipeline.AmountRec{
					{Component: "benzene", Response: &response, Amount: &amount, Unit: "mg/kg", InRange: true},
					{Component: "xylol µ", Unit: "mg/kg", Note: "no peak"},
				},
				Status: "invalid", Reasons: []string{"bracketing drift: check standard −8.25 %, beyond ±5 %"},
				LotRecord: "lot-L-s.json"}
			return rec
		}, "UNDETERMINED — the run is invalid and its results may not be used", "p 1"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			rec := tc.rec()
			data := xlsxRender(t, rec)
			checkRoundTrip(t, rec, data)
			x := xlsxOpen(t, data)
			x.wantText(xlSheetSummary, 2, x.findRow(xlSheetSummary, 1, "Verdict"), tc.verdict)
			if len(rec.Peaks) == 0 {
				x.wantText(xlSheetPeaks, 1, 2, tc.peak)
			} else {
				x.wantText(xlSheetPeaks, 2, 2, tc.peak)
			}
			if rec.Trace == nil {
				x.wantText(xlSheetTrace, 1, 1, "The record holds no trace.")
			}
			if !bytes.Equal(data, xlsxRender(t, rec)) {
				t.Error("a second rendering differs")
			}
		})
	}
}

func TestXLSXErrors(t *testing.T) {
	tests := []struct {
		name string
		edit func(*pipeline.Record)
		want string
	}{
		{"no time", func(r *pipeline.Record) { r.Provenance.ProcessedAt = "" }, "processed_at"},
		{"local time", func(r *pipeline.Record) { r.Provenance.ProcessedAt = "2027-03-04 05:06" }, "RFC 3339"},
		{"points", func(r *pipeline.Record) { r.Trace.Points++ }, "points is 11 but raw holds 10"},
		{"processed", func(r *pipeline.Record) { r.Trace.Processed = r.Trace.Processed[1:] }, "processed holds 9 values, raw 10"},
		{"baseline", func(r *pipeline.Record) { r.Trace.Baseline = append(r.Trace.Baseline, 0) }, "baseline holds 11 values"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			rec := xlsxSynthetic(2, 10, "L", "p")
			tc.edit(rec)
			err := WriteXLSX(&bytes.Buffer{}, rec)
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want one saying %q", err, tc.want)
			}
		})
	}
	if err := WriteXLSX(&bytes.Buffer{}, nil); err == nil {
		t.Error("no error for a nil record")
	}
}

// xlsxHelperOut names the file the helper process renders the demo
// workbook into.
const xlsxHelperOut = "LOTGATE_XLSX_HELPER_OUT"

// TestXLSXHelperProcess is not a test: TestXLSXReproducible runs it in a
// second process to render the demo workbook there.
func TestXLSXHelperProcess(t *testing.T) {
	out := os.Getenv(xlsxHelperOut)
	if out == "" {
		t.Skip("run by TestXLSXReproducible")
	}
	if err := os.WriteFile(out, xlsxRender(t, xlsxDemoRecord(t, "T998-26-1142.csv")), 0o644); err != nil {
		t.Fatal(err)
	}
}

func TestXLSXReproducible(t *testing.T) {
	rec := xlsxDemoRecord(t, "T998-26-1142.csv")
	first := xlsxRender(t, rec)
	// Map order changes from one iteration to the next: render a few
	// times in this process.
	for i := range 4 {
		if !bytes.Equal(first, xlsxRender(t, rec)) {
			t.Fatalf("rendering %d differs from the first", i+2)
		}
	}
	syn := xlsxSynthetic(20, 500, "L-r", "p")
	one := xlsxRender(t, syn)
	for i := range 8 {
		if !bytes.Equal(one, xlsxRender(t, syn)) {
			t.Fatalf("synthetic rendering %d differs from the first", i+2)
		}
	}
	if testing.Short() {
		return
	}
	// Later, and in another process: the same bytes.
	time.Sleep(1100 * time.Millisecond)
	out := filepath.Join(t.TempDir(), "other.xlsx")
	cmd := exec.Command(os.Args[0], "-test.run=^TestXLSXHelperProcess$", "-test.count=1")
	cmd.Env = append(os.Environ(), xlsxHelperOut+"="+out)
	if msg, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("helper process: %v\n%s", err, msg)
	}
	other, err := os.ReadFile(out)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(first, other) {
		t.Error("the workbook rendered in another process, a second later, differs")
	}
}

func TestXLSXDates(t *testing.T) {
	rec := xlsxSynthetic(2, 20, "L-d", "p")
	data := xlsxRender(t, rec)
	want := time.Date(2027, 3, 4, 5, 6, 7, 0, time.UTC) // the record's processed_at
	zr, err := zip.NewReader(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range zr.File {
		if !f.Modified.Equal(want) {
			t.Errorf("zip entry %s modified %v, want %v", f.Name, f.Modified, want)
		}
	}
	x := xlsxOpen(t, data)
	props, err := x.f.GetDocProps()
	if err != nil {
		t.Fatal(err)
	}
	if props.Created != rec.Provenance.ProcessedAt || props.Modified != rec.Provenance.ProcessedAt {
		t.Errorf("document created %q, modified %q, want both %q", props.Created, props.Modified, rec.Provenance.ProcessedAt)
	}
}

func TestXLSXChartData(t *testing.T) {
	rec := xlsxDemoRecord(t, "T998-26-1141.csv")
	x := xlsxOpen(t, xlsxRender(t, rec))
	rows, err := x.f.GetRows(xlSheetChartData, excelize.Options{RawCellValue: true})
	if err != nil {
		t.Fatal(err)
	}
	tr := rec.Trace
	if n := len(rows) - 1; n > 2*xlChartBuckets || n < xlChartBuckets {
		t.Fatalf("%d chart rows for %d points, want %d to %d", n, tr.Points, xlChartBuckets, 2*xlChartBuckets)
	}
	hi, lo := math.Inf(-1), math.Inf(1)
	prev := 0 // trace points are numbered from 1
	for _, r := range rows[1:] {
		i, err := strconv.Atoi(r[3])
		if err != nil || i <= prev {
			t.Fatalf("row %q: trace points not increasing after %d", r, prev)
		}
		prev = i
		for j, want := range []float64{tr.StartMin + float64(i-1)*tr.IntervalMin, tr.Processed[i-1], tr.Baseline[i-1]} {
			if got, err := strconv.ParseFloat(r[j], 64); err != nil || got != want {
				t.Fatalf("chart row %q, column %d: want %v", r, j+1, want)
			}
		}
		y, _ := strconv.ParseFloat(r[1], 64)
		hi, lo = math.Max(hi, y), math.Min(lo, y)
	}
	// Min–max buckets keep the trace's extremes (common practice for
	// drawing long signals): the main peak's apex and the lowest point.
	if hi != slices.Max(tr.Processed) || lo != slices.Min(tr.Processed) {
		t.Errorf("chart spans %v to %v, the trace %v to %v", lo, hi, slices.Min(tr.Processed), slices.Max(tr.Processed))
	}
}

func TestXLSXChartRows(t *testing.T) {
	tests := []struct {
		name string
		n    int
	}{{"empty", 0}, {"short", 17}, {"at the limit", 2 * xlChartBuckets}, {"just over", 2*xlChartBuckets + 1},
		{"long", 36001}, {"very long", 250_003}}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			y := make([]float64, tc.n)
			for i := range y {
				y[i] = math.Sin(float64(i)*0.37) + math.Sin(float64(i)*0.0013)
			}
			if tc.n > 100 {
				y[tc.n/3] = 50  // a one-point spike
				y[tc.n/2] = -50 // and a one-point dip
			}
			idx := xlChartRows(y)
			if tc.n <= 2*xlChartBuckets && len(idx) != tc.n {
				t.Fatalf("%d rows for a short trace of %d", len(idx), tc.n)
			}
			if len(idx) > 2*xlChartBuckets {
				t.Fatalf("%d rows, more than %d", len(idx), 2*xlChartBuckets)
			}
			if !slices.IsSorted(idx) || len(slices.Compact(slices.Clone(idx))) != len(idx) {
				t.Fatal("rows not in strictly increasing order")
			}
			if tc.n == 0 {
				return
			}
			got := make([]float64, len(idx))
			for k, i := range idx {
				got[k] = y[i]
			}
			if slices.Max(got) != slices.Max(y) || slices.Min(got) != slices.Min(y) {
				t.Errorf("extremes lost: %v..%v of %v..%v", slices.Min(got), slices.Max(got), slices.Min(y), slices.Max(y))
			}
		})
	}
}

func TestXLSXDecimals(t *testing.T) {
	// Values that need all 17 significant digits, sub-normal and large
	// magnitudes: fixed notation with xlDecimals places reads back as the
	// same float64 (IEEE 754 binary64, shortest round-trip decimal).
	for _, v := range []float64{0, 1, -2.5, 0.1 + 0.2, 1.0 / 3, 99.9003922459451, 199999.99597089872, 1e-9,
		6.02214076e23, 5e-324, math.MaxFloat64, -1e21, 123456789012345680} {
		s := strconv.FormatFloat(v, 'f', xlDecimals(v), 64)
		if got, err := strconv.ParseFloat(s, 64); err != nil || got != v {
			t.Errorf("%v written as %s reads back as %v", v, s, got)
		}
	}
}

// xlsxOffice finds LibreOffice, or "" when it is not installed.
func xlsxOffice() string {
	for _, name := range []string{"libreoffice", "soffice"} {
		if path, err := exec.LookPath(name); err == nil {
			return path
		}
	}
	return ""
}

// TestXLSXLibreOffice has LibreOffice read the workbook: its CSV export of
// the first sheet must hold the summary values.
func TestXLSXLibreOffice(t *testing.T) {
	office := xlsxOffice()
	if office == "" {
		t.Skip("LibreOffice is not installed")
	}
	if testing.Short() {
		t.Skip("slow: starts LibreOffice")
	}
	rec := xlsxDemoRecord(t, "T998-26-1142.csv")
	dir := t.TempDir()
	in := filepath.Join(dir, "lot.xlsx")
	if err := os.WriteFile(in, xlsxRender(t, rec), 0o644); err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithTimeout(context.Background(), 3*time.Minute)
	defer cancel()
	// A profile of its own, so that a LibreOffice already running does
	// not take the job; the filter options are separator 44 (,), quote
	// 34 (") and character set 76, UTF-8 (from memory).
	cmd := exec.CommandContext(ctx, office, "-env:UserInstallation=file://"+filepath.ToSlash(filepath.Join(dir, "profile")),
		"--headless", "--convert-to", "csv:Text - txt - csv (StarCalc):44,34,76", "--outdir", dir, in)
	if msg, err := cmd.CombinedOutput(); err != nil {
		t.Fatalf("LibreOffice: %v\n%s", err, msg)
	}
	f, err := os.Open(filepath.Join(dir, "lot.csv"))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	r := csv.NewReader(f)
	r.FieldsPerRecord = -1
	rows, err := r.ReadAll()
	if err != nil {
		t.Fatal(err)
	}
	find := func(first string) []string {
		for _, row := range rows {
			if len(row) > 0 && row[0] == first {
				return row
			}
		}
		t.Errorf("LibreOffice shows no row %q", first)
		return make([]string, 10)
	}
	for label, want := range map[string]string{
		"Verdict": "FAIL — 1 limit not met", "Product": rec.Report.Product, "Grade": rec.Report.Grade,
		"Lot": metaValue(rec, "lot"), "Sample ID": metaValue(rec, "sample_id"),
		"Processed at (UTC)": rec.Provenance.ProcessedAt,
	} {
		if got := find(label)[1]; got != want {
			t.Errorf("LibreOffice shows %s %q, want %q", label, got, want)
		}
	}
	for _, l := range rec.Limits {
		row := find(l.Name)
		if got := []string{row[3], row[4], row[5], row[8], row[9]}; !slices.Equal(got, []string{l.Reported, l.Min, l.Max, l.Status, l.Reason}) {
			t.Errorf("LibreOffice shows limit %q as %q, want %q", l.Name, got, []string{l.Reported, l.Min, l.Max, l.Status, l.Reason})
		}
		// The unrounded value as LibreOffice displays it (General: up
		// to 15 significant digits).
		if v, err := strconv.ParseFloat(row[2], 64); err != nil || math.Abs(v-*l.Value) > 1e-13*math.Abs(*l.Value) {
			t.Errorf("LibreOffice shows the value of %q as %q, want %v", l.Name, row[2], *l.Value)
		}
	}
}

package reports

import (
	"bytes"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"github.com/xuri/excelize/v2"

	"lotgate/pipeline"
	"lotgate/pipeline/batch"
)

func fp(x float64) *float64 { return &x }

// testLot is a lot record as the batch makes one: two samples in three
// replicates, a five-level calibration, three gates, and a sequence.
func testLot(verdict string) *batch.Lot {
	l := &batch.Lot{
		Schema: batch.Schema,
		Provenance: batch.LotProvenance{Tool: "lotgate", Version: pipeline.Version, PipelineFile: "night.hcl",
			PipelineSHA256: strings.Repeat("ab", 32), SequenceFile: "n1.sequence.hcl", SequenceSHA256: strings.Repeat("cd", 32),
			ProcessedAt: "2026-12-01T00:00:00Z"},
		Lot:      "T-1",
		Sequence: batch.SequenceRec{Name: "n1", Description: "Night sequence", Injections: 9},
		Method:   batch.LotMethod{Name: "night", Revision: 2, Description: "a method", Calibration: map[string]any{"unit": "mg/kg"}},
		Verdict:  verdict,
		Reasons:  []string{},
		Warnings: []string{"injection 4 (A-1): the data file's lot is \"T-2\""},
		Report: pipeline.ReportSettings{Formats: []string{"json"}, Site: "Test works", Product: "Toluene", Grade: "T",
			Paper: "A4", Signatures: []string{"Reviewed by"}, Cautions: pipeline.DefaultCautions},
	}
	if verdict == batch.InvalidRun {
		l.Reasons = []string{"bracketing drift: check standard S3 (injection 9): A −8.2 % from the opening standards, beyond ±5 %"}
	}
	cal := batch.CalComponentRec{Component: "A", Model: "linear", Weighting: "1/x", Response: "area",
		Coefficients: []float64{0.05, 2.01}, StandardErrors: []float64{0.01, 0.002}, R2: fp(0.99991), ResidualSD: fp(0.0097), DF: 3,
		LOD: fp(1.17), LOQ: fp(3.56), RangeMin: 10, RangeMax: 50, MaxDeviation: 10, MaxDeviationLowest: 15, Status: "pass"}
	for lv := 1; lv <= 5; lv++ {
		x := 10 * float64(lv)
		y := 0.05 + 2.01*x + 0.02*float64(lv%2*2-1)
		cal.Points = append(cal.Points, batch.CalPointRec{Injection: lv + 1, ID: "c", Standard: "S", Level: lv, Amount: x,
			Response: fp(y), Predicted: fp(y - 0.02), Residual: fp(0.02), BackCalculated: fp(x * 1.001), Accuracy: fp(100.1), Status: "pass"})
	}
	l.Calibration = &batch.CalibrationRec{Method: "external", Unit: "mg/kg", Components: []batch.CalComponentRec{cal}}
	l.Suitability = &batch.SuitabilityRec{Constants: "pharmacopoeia", Formulas: []string{"N = 5.54·(tR/wh)²"}, NoiseWindow: 5, Noise: "blank",
		Gates: []batch.GateRec{
			{Gate: "resolution", Name: "resolution B / C", Criterion: "≥ 1.5", Value: fp(2.5), Status: "pass"},
			{Gate: "precision", Name: "injection precision A", Criterion: "RSD ≤ 2 %", Value: fp(0.45), Limit: fp(2), Status: "pass"},
			{Gate: "drift", Name: "bracketing drift", Criterion: "|difference| ≤ 5 %", Value: fp(-8.2), Status: "fail",
				Reason: "check standard S3 (injection 9): A −8.2 %", Invalidates: []int{7, 8}},
		}}
	for i, role := range []string{"blank", "calibration", "calibration", "calibration", "calibration", "calibration", "sample", "sample", "check"} {
		in := batch.InjectionRec{Number: i + 1, ID: "i", File: "f.csv", InputSHA256: strings.Repeat("0", 64), Record: "f.json", Role: role, Status: batch.StatusValid}
		if role == "sample" {
			in.Sample, in.Replicate = "T-1-A", i-5
		}
		l.Injections = append(l.Injections, in)
	}
	sample := batch.SampleRec{Sample: "T-1-A", Injections: []int{7, 8}, Status: batch.StatusValid, Verdict: "pass",
		Results: []batch.ResultRec{{Name: "A", Expr: "component.A.amount", N: 2, Mean: fp(25.1), SD: fp(0.1), RSD: fp(0.4), MaxRSD: fp(5),
			Reported: "25", Max: "40", Unit: "mg/kg", Rounding: "astm-e29", Status: "pass",
			Replicates: []batch.ReplicateRec{{Injection: 7, Replicate: 1, Value: fp(25.03)}, {Injection: 8, Replicate: 2, Value: fp(25.17)}}}}}
	if verdict == batch.InvalidRun {
		sample.Status, sample.Verdict, sample.Reasons = batch.StatusInvalid, batch.StatusInvalid, l.Reasons
	}
	l.Samples = []batch.SampleRec{sample}
	return l
}

// The lot summary shows the verdict in words that cannot be mistaken, and
// a certificate only for a released lot; it is reproducible.
func TestLotPDF(t *testing.T) {
	for _, c := range []struct {
		verdict string
		want    []string
	}{
		{batch.Released, []string{"Lot certificate of analysis", "Lot T-1 RELEASED", "conforms", "25.0; 25.2"}},
		{batch.InvalidRun, []string{"Lot summary — no certificate", "INVALID RUN", "no certificate is issued", "bracketing drift",
			"invalid run", "fails"}},
		{batch.Rejected, []string{"Lot T-1 REJECTED"}},
		{batch.Undetermined, []string{"NOT RELEASED"}},
	} {
		lot := testLot(c.verdict)
		pdf, err := RenderLot("pdf", lot, nil)
		if err != nil {
			t.Fatal(err)
		}
		again, _ := RenderLot("pdf", lot, nil)
		if !bytes.Equal(pdf, again) {
			t.Errorf("%s: two renderings differ", c.verdict)
		}
		if *pdfOut != "" {
			_ = os.WriteFile(filepath.Join(*pdfOut, "lot-"+strings.ReplaceAll(c.verdict, " ", "-")+".pdf"), pdf, 0o644)
		}
		text := strings.Join(strings.Fields(extract(t, pdf)), " ")
		digest, _ := lotDigest(lot)
		for _, w := range append(c.want, "Calibration (external standard, amounts in mg/kg)", "System suitability",
			"Sequence", digest, "Reviewed by", pipeline.DefaultCautions[0][:40]) {
			if !strings.Contains(text, w) {
				t.Errorf("%s: the summary lacks %q", c.verdict, w)
			}
		}
	}
}

// The lot workbook holds every sheet, the verdict and every number of the
// record, and is reproducible.
func TestLotXLSX(t *testing.T) {
	lot := testLot(batch.InvalidRun)
	data, err := RenderLot("xlsx", lot, nil)
	if err != nil {
		t.Fatal(err)
	}
	again, _ := RenderLot("xlsx", lot, nil)
	if !bytes.Equal(data, again) {
		t.Error("two renderings differ")
	}
	f, err := excelize.OpenReader(bytes.NewReader(data))
	if err != nil {
		t.Fatal(err)
	}
	defer f.Close()
	want := []string{lotSheetSummary, lotSheetResults, lotSheetSuitability, lotSheetCalibration, lotSheetSequence, lotSheetProvenance, lotSheetChartData}
	if got := f.GetSheetList(); strings.Join(got, ",") != strings.Join(want, ",") {
		t.Errorf("sheets %v, want %v", got, want)
	}
	cell := func(sheet, ref string) string {
		v, err := f.GetCellValue(sheet, ref)
		if err != nil {
			t.Fatal(err)
		}
		return v
	}
	if v := cell(lotSheetSummary, "A1"); v != "Lot summary — no certificate" {
		t.Errorf("title %q", v)
	}
	rows, _ := f.GetRows(lotSheetSummary)
	found := false
	for _, r := range rows {
		if len(r) > 1 && r[0] == "Verdict" && r[1] == "INVALID RUN" {
			found = true
		}
	}
	if !found {
		t.Error("the summary sheet lacks the verdict INVALID RUN")
	}
	// Results: sample, status, test, expression, the two replicates …
	if got := []string{cell(lotSheetResults, "A2"), cell(lotSheetResults, "C2"), cell(lotSheetResults, "E2"), cell(lotSheetResults, "F2")}; strings.Join(got, "|") != "T-1-A|A|25.03|25.17" {
		t.Errorf("results row: %v", got)
	}
	digest, _ := lotDigest(lot)
	prov, _ := f.GetRows(lotSheetProvenance)
	if !strings.Contains(strings.Join(flatten(prov), " "), digest) {
		t.Error("the provenance sheet lacks the lot record's digest")
	}
}

func flatten(rows [][]string) []string {
	var out []string
	for _, r := range rows {
		out = append(out, r...)
	}
	return out
}

// WriteLot writes the three lot documents atomically and refuses to
// overwrite other content without replace.
func TestWriteLot(t *testing.T) {
	dir := t.TempDir()
	lot := testLot(batch.Released)
	outs, err := WriteLot(dir, lot, nil, false)
	if err != nil || len(outs) != 3 || filepath.Base(outs[0].Path) != "lot-T-1.json" || !outs[2].Changed {
		t.Fatalf("%v %+v", err, outs)
	}
	lot.Verdict = batch.Rejected
	if _, err := WriteLot(dir, lot, nil, false); err == nil || !strings.Contains(err.Error(), "--replace") {
		t.Errorf("overwrite without replace: %v", err)
	}
	if _, err := RenderLot("docx", lot, nil); err == nil {
		t.Error("an unknown format renders")
	}
	if _, err := RenderLot("pdf", nil, nil); err == nil {
		t.Error("a nil lot renders")
	}
}

func BenchmarkWriteLotPDF(b *testing.B) {
	lot := testLot(batch.Released)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := RenderLot("pdf", lot, nil); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkWriteLotXLSX(b *testing.B) {
	lot := testLot(batch.Released)
	b.ReportAllocs()
	for b.Loop() {
		if _, err := RenderLot("xlsx", lot, nil); err != nil {
			b.Fatal(err)
		}
	}
}

package reports

import (
	"archive/zip"
	"bytes"
	"io"
	"strings"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"
)

func sampleImpact() *Impact {
	return &Impact{
		Pipeline: `"toluene-release" revision 4`,
		Bundle:   strings.Repeat("ab", 32),
		Rows: []ImpactRow{
			{Record: "T998-26-1141.json", Input: "T998-26-1141.csv", Lot: "T998-26-1141", Sample: "T998-26-1141-A",
				OldVerdict: "pass", NewVerdict: "fail",
				Limits: []LimitChange{{Name: "Largest unknown", OldReported: "0.015", NewReported: "0.015",
					OldLimit: "max 0.030", NewLimit: "max 0.010", OldStatus: "pass", NewStatus: "fail"}}},
			{Record: "blank-26-1141.json", Input: "blank-26-1141.csv", Lot: "-", Sample: "BLANK-2611-30",
				OldVerdict: "pass", NewVerdict: "pass"},
			{Record: "broken.json", Error: "broken.json: not a lotgate record"},
		},
	}
}

func TestImpactCounts(t *testing.T) {
	v, l, f := sampleImpact().Counts()
	if v != 1 || l != 1 || f != 1 {
		t.Errorf("counts %d verdicts, %d limits, %d failed; want 1, 1, 1", v, l, f)
	}
	c := LimitChange{Name: "Benzene", NewReported: "0.004", NewLimit: "max 0.005", NewStatus: "pass"}
	if got := c.String(); got != "Benzene: (no such limit) → 0.004 (max 0.005) pass" {
		t.Errorf("added limit: %q", got)
	}
}

// The workbook reads back with the rows written; its bytes depend only on
// the impact and the given time.
func TestImpactWorkbook(t *testing.T) {
	at := time.Unix(1796083200, 0)
	data, err := ImpactWorkbook(sampleImpact(), at)
	if err != nil {
		t.Fatal(err)
	}
	again, err := ImpactWorkbook(sampleImpact(), at)
	if err != nil {
		t.Fatal(err)
	}
	if !bytes.Equal(data, again) {
		t.Error("two workbooks of the same impact and time differ")
	}
	// An xlsx file is a zip package (ECMA-376 Part 2, Open Packaging
	// Conventions); every entry of ours carries no time of its own.
	zr, err := zip.NewReader(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range zr.File {
		if f.ModifiedDate != 0 || f.ModifiedTime != 0 {
			t.Errorf("%s carries a time stamp %v", f.Name, f.Modified)
		}
		if f.Name == "docProps/core.xml" {
			rc, _ := f.Open()
			core, _ := io.ReadAll(rc)
			rc.Close()
			if !bytes.Contains(core, []byte("2026-12-01T00:00:00Z")) {
				t.Errorf("core properties do not carry the given time: %s", core)
			}
		}
	}
	x, err := excelize.OpenReader(bytes.NewReader(data))
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	rows, err := x.GetRows(impactSheet)
	if err != nil {
		t.Fatal(err)
	}
	var header int
	for i, r := range rows {
		if len(r) > 0 && r[0] == "Record" {
			header = i
		}
	}
	if header == 0 || len(rows) != header+4 {
		t.Fatalf("impact sheet rows %q", rows)
	}
	first := rows[header+1]
	if first[0] != "T998-26-1141.json" || first[4] != "pass" || first[5] != "fail" || first[6] != "yes" ||
		first[7] != "Largest unknown: 0.015 (max 0.030) pass → 0.015 (max 0.010) fail" {
		t.Errorf("first row %q", first)
	}
	if last := rows[header+3]; last[len(last)-1] != "broken.json: not a lotgate record" {
		t.Errorf("failed row %q", last)
	}
	limits, err := x.GetRows(limitsSheet)
	if err != nil {
		t.Fatal(err)
	}
	want := []string{"T998-26-1141.json", "T998-26-1141", "T998-26-1141-A", "Largest unknown", "0.015", "0.015", "max 0.030", "max 0.010", "pass", "fail"}
	if len(limits) != 2 || strings.Join(limits[1], "|") != strings.Join(want, "|") {
		t.Errorf("limits sheet %q", limits)
	}
	props, err := x.GetDocProps()
	if err != nil || props.Created != "2026-12-01T00:00:00Z" || props.Modified != props.Created {
		t.Errorf("document properties %+v, %v", props, err)
	}
	later, err := ImpactWorkbook(sampleImpact(), at.Add(time.Hour))
	if err != nil || bytes.Equal(later, data) {
		t.Errorf("a workbook of another time has the same bytes (%v)", err)
	}
}

func BenchmarkImpactWorkbook(b *testing.B) {
	imp := sampleImpact()
	for range 7 {
		imp.Rows = append(imp.Rows, imp.Rows...)
	}
	at := time.Unix(1796083200, 0)
	for b.Loop() {
		if _, err := ImpactWorkbook(imp, at); err != nil {
			b.Fatal(err)
		}
	}
}

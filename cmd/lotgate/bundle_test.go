package main

import (
	"archive/zip"
	"bytes"
	"os"
	"path/filepath"
	"regexp"
	"strings"
	"testing"
	"time"

	"github.com/xuri/excelize/v2"

	"lotgate/pipeline/bundle"
)

const (
	demoR3 = "../../examples/toluene-release.hcl"
	demoR4 = "../../examples/toluene-release-r4.hcl"
)

// writeBundle freezes a pipeline into dir without the CLI (and without an
// fsync), for tests that need a bundle but do not test freeze.
func writeBundle(t *testing.T, pipe, path string) string {
	t.Helper()
	data, err := bundle.Freeze(pipe, time.Unix(1796083200, 0))
	if err != nil {
		t.Fatal(err)
	}
	if err := os.WriteFile(path, data, 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// Freeze → run → replay is identical; the record carries the bundle digest.
func TestFreezeRunReplay(t *testing.T) {
	t.Setenv("SOURCE_DATE_EPOCH", epoch)
	dir := t.TempDir()
	b3 := filepath.Join(dir, "r3"+bundle.Ext)
	code, out, errs := runCLI(t, "freeze", demoR3, "-o", b3)
	if code != exitOK {
		t.Fatalf("freeze: exit %d: %s", code, errs)
	}
	opened, err := bundle.Open(b3)
	if err != nil {
		t.Fatal(err)
	}
	if !strings.Contains(out, "bundle sha256 "+opened.Digest) {
		t.Errorf("freeze does not print the bundle digest:\n%s", out)
	}
	data := filepath.Join(shared, "input", "T998-26-1141.csv")
	recs := filepath.Join(dir, "records")
	if code, _, errs := runCLI(t, "run", "-p", b3, "-o", recs, data); code != exitOK {
		t.Fatalf("run with a bundle: exit %d: %s", code, errs)
	}
	rec, _ := readRecord(t, filepath.Join(recs, "T998-26-1141.json"))
	if rec.Provenance.BundleSHA256 != opened.Digest {
		t.Errorf("record names bundle %q, want %s", rec.Provenance.BundleSHA256, opened.Digest)
	}
	code, out, errs = runCLI(t, "replay", b3, filepath.Join(recs, "T998-26-1141.json"), data)
	if code != exitOK || !strings.Contains(out, "identical") || !strings.Contains(out, "0 (equal bit for bit)") || errs != "" {
		t.Errorf("replay: exit %d\n%s\n%s", code, out, errs)
	}
}

// The committed bundle and its golden record (made once, on one machine)
// replay to the same record on a clean checkout, found by the CLI.
func TestFixtureReplayCLI(t *testing.T) {
	fixture := filepath.Join("..", "..", "pipeline", "bundle", "testdata")
	code, out, errs := runCLI(t, "replay", filepath.Join(fixture, "toluene-release-r3"+bundle.Ext),
		filepath.Join(fixture, "golden", "T998-26-1141.json"), filepath.Join("..", "..", "examples", "data", "T998-26-1141.csv"))
	if code != exitOK || !strings.Contains(out, "identical") {
		t.Errorf("replay of the fixture: exit %d\n%s\n%s", code, out, errs)
	}
}

// The demo's method change (revision 4 tightens the largest unknown to
// 0.010 %): diff lists the limit, replay of a revision 3 record under it
// lists the differing fields, and replay --with turns the passing lot into
// a failing one in the table and the workbook.
func TestMethodChange(t *testing.T) {
	t.Setenv("SOURCE_DATE_EPOCH", epoch)
	dir := t.TempDir()
	b3 := writeBundle(t, demoR3, filepath.Join(dir, "r3"+bundle.Ext))
	b4 := writeBundle(t, demoR4, filepath.Join(dir, "r4"+bundle.Ext))

	code, out, errs := runCLI(t, "diff", b3, b4)
	if code != exitVerdict || !regexpLine(out, `limit "Largest unknown"\s+max\s+0\.030\s+0\.010`) ||
		!regexpLine(out, `pipeline "toluene-release"\s+revision\s+3\s+4`) || !strings.Contains(out, "2 settings differ") {
		t.Errorf("diff: exit %d\n%s\n%s", code, out, errs)
	}

	rec1141 := filepath.Join(shared, "T998-26-1141.json")
	code, out, errs = runCLI(t, "replay", b4, rec1141)
	if code != exitVerdict || !regexpLine(out, `limits\[Largest unknown\]\.max\s+0\.030\s+0\.010`) ||
		!regexpLine(out, `verdict\s+pass\s+fail`) || !strings.Contains(errs, "warning: the record was made by pipeline") {
		t.Errorf("replay under revision 4: exit %d\n%s\n%s", code, out, errs)
	}

	records := make([]string, len(demoRecords))
	for i, r := range demoRecords {
		records[i] = filepath.Join(shared, r)
	}
	book := filepath.Join(dir, "impact.xlsx")
	code, out, errs = runCLI(t, append([]string{"replay", "--with", b4, "-o", book}, records...)...)
	if code != exitVerdict || !regexpLine(out, `T998-26-1141\.json .* pass → FAIL\s+Largest unknown: 0\.015 \(max 0\.030\) pass → 0\.015 \(max 0\.010\) fail`) ||
		!strings.Contains(out, "verdicts that change: 1 of 3") {
		t.Errorf("replay --with: exit %d\n%s\n%s", code, out, errs)
	}
	x, err := excelize.OpenFile(book)
	if err != nil {
		t.Fatal(err)
	}
	defer x.Close()
	rows, err := x.GetRows("Impact")
	if err != nil {
		t.Fatal(err)
	}
	found := false
	for _, r := range rows {
		if len(r) > 6 && r[0] == "T998-26-1141.json" {
			found = true
			if r[4] != "pass" || r[5] != "fail" || r[6] != "yes" {
				t.Errorf("workbook row %q, want pass → fail", r)
			}
		}
	}
	if !found {
		t.Errorf("no row for T998-26-1141.json in %q", rows)
	}
}

// regexpLine reports whether a line of out matches pattern.
func regexpLine(out, pattern string) bool {
	return regexp.MustCompile("(?m)" + pattern).MatchString(out)
}

// A bundle with one changed byte is refused by every command that takes a
// pipeline, naming the changed file; data whose digest is not the record's
// is refused too.
func TestBundleRefusals(t *testing.T) {
	dir := t.TempDir()
	good := writeBundle(t, demoR3, filepath.Join(dir, "r3"+bundle.Ext))
	data, err := os.ReadFile(good)
	if err != nil {
		t.Fatal(err)
	}
	zr, err := zip.NewReader(bytes.NewReader(data), int64(len(data)))
	if err != nil {
		t.Fatal(err)
	}
	for _, f := range zr.File {
		if f.Name == "okkerby-logo.png" {
			off, err := f.DataOffset()
			if err != nil {
				t.Fatal(err)
			}
			data[off+100] ^= 0x01
		}
	}
	bad := filepath.Join(dir, "bad"+bundle.Ext)
	if err := os.WriteFile(bad, data, 0o644); err != nil {
		t.Fatal(err)
	}
	rec := filepath.Join(shared, "T998-26-1141.json")
	lot1142 := filepath.Join(shared, "input", "T998-26-1142.csv")
	cases := []struct {
		name string
		args []string
		code int
		want string
	}{
		{"run", []string{"run", "-p", bad, "-o", filepath.Join(dir, "out"), lot1142}, exitUsage, "okkerby-logo.png"},
		{"replay", []string{"replay", bad, rec}, exitUsage, "okkerby-logo.png"},
		{"replay --with", []string{"replay", "--with", bad, rec}, exitUsage, "okkerby-logo.png"},
		{"diff", []string{"diff", good, bad}, exitUsage, "okkerby-logo.png"},
		{"other data", []string{"replay", good, rec, lot1142}, exitFileFail, "T998-26-1142.csv has sha256"},
		{"freeze without -o", []string{"freeze", demoR3}, exitUsage, "give -o FILE"},
		{"replay without record", []string{"replay", good}, exitUsage, "BUNDLE RECORD.json"},
		{"negative tolerance", []string{"replay", "--tolerance", "-1", good, rec}, exitUsage, "--tolerance"},
		{"diff of one", []string{"diff", good}, exitUsage, "two bundles"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			code, out, errs := runCLI(t, c.args...)
			if code != c.code || !strings.Contains(errs, c.want) {
				t.Errorf("exit %d (want %d), stderr should say %q:\n%s\n%s", code, c.code, c.want, errs, out)
			}
		})
	}
	if code, out, _ := runCLI(t, "help", "replay"); code != exitOK || !strings.Contains(out, "--with") {
		t.Errorf("help replay: exit %d\n%s", code, out)
	}
}

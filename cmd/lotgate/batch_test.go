package main

import (
	"bytes"
	"encoding/json"
	"os"
	"os/exec"
	"path/filepath"
	"strings"
	"testing"

	"lotgate/examples"
	seqgen "lotgate/examples/synth"
	"lotgate/pipeline/batch"
)

func readLot(t *testing.T, path string) *batch.Lot {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var l batch.Lot
	if err := json.Unmarshal(b, &l); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return &l
}

// The demo's night sequences: the first releases its lot with a
// certificate per sample injection; the second, whose closing check
// standard drifts, is an invalid run with its reason on the lot and on
// every sample record, and no sample certificate is written.
func TestDemoNightSequences(t *testing.T) {
	released := readLot(t, filepath.Join(shared, "night-released", "lot-T998-26-1150.json"))
	if released.Schema != batch.Schema || released.Verdict != batch.Released || len(released.Samples) != 2 {
		t.Errorf("released lot: schema %q, verdict %q %v, %d samples", released.Schema, released.Verdict, released.Reasons, len(released.Samples))
	}
	if released.Provenance.ProcessedAt != "2026-12-01T00:00:00Z" {
		t.Errorf("processed_at %q", released.Provenance.ProcessedAt)
	}
	drift := readLot(t, filepath.Join(shared, "night-drift", "lot-T998-26-1151.json"))
	if drift.Verdict != batch.InvalidRun || len(drift.Reasons) == 0 || !strings.Contains(drift.Reasons[0], "bracketing drift") {
		t.Fatalf("drifting lot: verdict %q, reasons %v", drift.Verdict, drift.Reasons)
	}
	for _, c := range []struct {
		dir, prefix string
		pdfs        int
		status      string
	}{{"night-released", "n1150", 6, batch.StatusValid}, {"night-drift", "n1151", 0, batch.StatusInvalid}} {
		pdfs, _ := filepath.Glob(filepath.Join(shared, c.dir, c.prefix+"-*.pdf"))
		xlsx, _ := filepath.Glob(filepath.Join(shared, c.dir, c.prefix+"-*.xlsx"))
		records, _ := filepath.Glob(filepath.Join(shared, c.dir, c.prefix+"-*.json"))
		if len(pdfs) != c.pdfs || len(xlsx) != 6 || len(records) != 18 {
			t.Errorf("%s: %d certificates (want %d), %d workbooks, %d records", c.dir, len(pdfs), c.pdfs, len(xlsx), len(records))
		}
		for _, ext := range []string{".json", ".xlsx", ".pdf"} {
			if _, err := os.Stat(filepath.Join(shared, c.dir, "lot-"+map[string]string{"n1150": "T998-26-1150", "n1151": "T998-26-1151"}[c.prefix]+ext)); err != nil {
				t.Errorf("%s: lot document %s: %v", c.dir, ext, err)
			}
		}
		rec, _ := readRecord(t, filepath.Join(shared, c.dir, c.prefix+"-12-A-1.json"))
		if rec.Batch == nil || rec.Batch.Status != c.status || rec.Batch.Role != batch.RoleSample || len(rec.Batch.Amounts) != 2 {
			t.Errorf("%s: sample record's batch part %+v", c.dir, rec.Batch)
		}
		if c.status == batch.StatusInvalid && (rec.Verdict != "undetermined" || !strings.Contains(strings.Join(rec.Warnings, " "), "Invalid run")) {
			t.Errorf("%s: invalid sample record: verdict %q, warnings %v", c.dir, rec.Verdict, rec.Warnings)
		}
	}
	if _, err := exec.LookPath("pdftotext"); err != nil && os.Getenv("CI") != "true" {
		t.Skip("pdftotext is not installed")
	}
	out, err := exec.Command("pdftotext", "-layout", "-enc", "UTF-8", filepath.Join(shared, "night-drift", "lot-T998-26-1151.pdf"), "-").Output()
	if err != nil {
		t.Fatal(err)
	}
	text := strings.Join(strings.Fields(string(out)), " ")
	for _, want := range []string{"Lot summary — no certificate", "INVALID RUN", "no certificate is issued", "bracketing drift",
		"fails", "Calibration (external standard, amounts in mg/kg)", "Lot record SHA-256"} {
		if !strings.Contains(text, want) {
			t.Errorf("the invalid lot's summary lacks %q", want)
		}
	}
}

// The batch command: progress lines when not on a terminal, a bar when
// asked, the exit status, and no silent overwrite — a certificate left by an
// earlier run of an injection that is now invalid is refused, then removed
// with --replace.
func TestBatchCommand(t *testing.T) {
	t.Setenv("SOURCE_DATE_EPOCH", epoch)
	pipe := filepath.Join(shared, "input", "night-release.hcl")
	seq := filepath.Join(shared, "input", "night-drift", "n1151.sequence.hcl")
	out := t.TempDir()
	stale := writeFile(t, out, "n1151-13-A-2.pdf", "%PDF- an old certificate")
	code, stdout, stderr := runCLI(t, "batch", "-p", pipe, "-o", out, "--progress", "lines", seq)
	if code != exitFileFail || !strings.Contains(stderr, "certificate from an earlier run") {
		t.Errorf("stale certificate: exit %d, stderr %q", code, stderr)
	}
	if !strings.Contains(stderr, "processing 18/18") || !strings.Contains(stderr, "writing 19/19") || !strings.Contains(stderr, "lot-T998-26-1151") {
		t.Errorf("progress lines missing:\n%s", stderr)
	}
	code, stdout, stderr = runCLI(t, "batch", "-p", pipe, "-o", out, "--replace", "--progress", "bar", "--workers", "1", seq)
	if code != exitVerdict || !strings.Contains(stdout, "INVALID RUN") || !strings.Contains(stdout, "injections 12–17") {
		t.Errorf("drift: exit %d\n%s\n%s", code, stdout, stderr)
	}
	if !strings.Contains(stderr, "\rprocessing [") {
		t.Errorf("no progress bar: %q", stderr)
	}
	if _, err := os.Stat(stale); !os.IsNotExist(err) {
		t.Errorf("the earlier certificate of an invalid injection is still there: %v", err)
	}
	// The same records again: nothing changes, nothing is refused.
	code, _, stderr = runCLI(t, "batch", "-p", pipe, "-o", out, "--progress", "none", seq)
	if code != exitVerdict || stderr != "" {
		t.Errorf("rerun: exit %d, stderr %q", code, stderr)
	}
}

func TestBatchUsage(t *testing.T) {
	dir := t.TempDir()
	pipe := filepath.Join(shared, "input", "night-release.hcl")
	bad := writeFile(t, dir, "bad.sequence.hcl", "sequence \"s\" {\n  lot = \"L\"\n}\ninjection \"1\" {\n  file = \"x.csv\"\n  role = \"smaple\"\n}\n")
	unknown := writeFile(t, dir, "unknown.sequence.hcl", "sequence \"s\" {\n  lot = \"L\"\n}\nstandard \"S\" {\n  amounts = { benzen = 1 }\n}\ninjection \"1\" {\n  file = \"x.csv\"\n  role = \"calibration\"\n  standard = \"S\"\n}\n")
	cases := []struct {
		args []string
		want string
	}{
		{[]string{"batch", "-o", dir, bad}, "no pipeline"},
		{[]string{"batch", "-p", pipe, bad}, "no output folder"},
		{[]string{"batch", "-p", pipe, "-o", dir}, "give one sequence file"},
		{[]string{"batch", "-p", pipe, "-o", dir, "--workers", "0", bad}, "--workers must be at least 1"},
		{[]string{"batch", "-p", pipe, "-o", dir, "--progress", "fancy", bad}, "--progress is auto"},
		{[]string{"batch", "-p", pipe, "-o", dir, bad}, `did you mean "sample"?`},
		{[]string{"batch", "-p", pipe, "-o", dir, unknown}, `did you mean "benzene"?`},
		{[]string{"batch", "-p", pipe, "-o", dir, filepath.Join(dir, "missing.hcl")}, "missing.hcl"},
	}
	for _, c := range cases {
		code, _, stderr := runCLI(t, c.args...)
		if code != exitUsage || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: exit %d, stderr %q; want %d and %q", c.args[1:], code, stderr, exitUsage, c.want)
		}
	}
	if code, stdout, _ := runCLI(t, "batch", "--help"); code != exitOK || !strings.Contains(stdout, "Usage: lotgate batch") {
		t.Errorf("batch --help: exit %d, %q", code, stdout)
	}
}

// BenchmarkBatch40 processes a sequence of 40 injections of 36,001 points
// (30 min at 20 Hz) with every output: a record per injection, the workbook
// and certificate of each sample injection, and the lot documents.
func BenchmarkBatch40(b *testing.B) {
	in := b.TempDir()
	s := seqgen.BenchmarkSequence(40)
	for _, f := range s.Files {
		if err := os.WriteFile(filepath.Join(in, f.Name), f.Data, 0o644); err != nil {
			b.Fatal(err)
		}
	}
	logo, err := examples.FS.ReadFile("okkerby-logo.png")
	if err != nil {
		b.Fatal(err)
	}
	pipe := filepath.Join(in, examples.NightPipelineFile)
	for name, data := range map[string][]byte{pipe: examples.NightPipeline, filepath.Join(in, "okkerby-logo.png"): logo} {
		if err := os.WriteFile(name, data, 0o644); err != nil {
			b.Fatal(err)
		}
	}
	for _, workers := range []string{"1", "2"} {
		b.Run("workers="+workers, func(b *testing.B) {
			out := b.TempDir()
			for b.Loop() {
				var o, e bytes.Buffer
				code := run([]string{"batch", "-p", pipe, "-o", out, "--replace", "--progress", "none",
					"--workers", workers, filepath.Join(in, s.SequenceFile)}, &o, &e)
				if code != exitOK {
					b.Fatalf("batch: exit %d\n%s%s", code, o.String(), e.String())
				}
			}
		})
	}
}

package main

import (
	"bytes"
	"encoding/json"
	"flag"
	"fmt"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"

	"lotgate/pipeline"
)

var update = flag.Bool("update", false, "rewrite the golden records under testdata/golden")

// epoch fixes the records' processed_at (2026-12-01T00:00:00Z).
const epoch = "1796083200"

func runCLI(t *testing.T, args ...string) (code int, stdout, stderr string) {
	t.Helper()
	var o, e bytes.Buffer
	code = run(args, &o, &e)
	return code, o.String(), e.String()
}

// shared is the folder of one demo run made with SOURCE_DATE_EPOCH = epoch,
// shared by the tests (writing outputs is fsync-bound, so it is made once).
var shared string

func TestMain(m *testing.M) {
	flag.Parse()
	dir, err := os.MkdirTemp("", "lotgate-demo-")
	if err != nil {
		panic(err)
	}
	os.Setenv("SOURCE_DATE_EPOCH", epoch)
	var o, e bytes.Buffer
	if code := run([]string{"demo", "-o", dir}, &o, &e); code != exitOK {
		panic(fmt.Sprintf("demo exit %d\n%s\n%s", code, o.String(), e.String()))
	}
	os.Unsetenv("SOURCE_DATE_EPOCH")
	shared = dir
	code := m.Run()
	os.RemoveAll(dir)
	os.Exit(code)
}

var demoRecords = []string{"T998-26-1141.json", "T998-26-1142.json", "blank-26-1141.json"}

func readRecord(t *testing.T, path string) (*pipeline.Record, []byte) {
	t.Helper()
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	var rec pipeline.Record
	if err := json.Unmarshal(b, &rec); err != nil {
		t.Fatalf("%s: %v", path, err)
	}
	return &rec, b
}

// The demo's records are golden files (without the trace arrays, which are
// checked for determinism below), and their verdicts are the scenario's:
// lot 1141 passes, lot 1142 fails on ethylbenzene, the blank is clean.
func TestDemoGolden(t *testing.T) {
	dir := shared
	want := []string{"pass", "fail", "pass"}
	for i, name := range demoRecords {
		verdict := want[i]
		rec, _ := readRecord(t, filepath.Join(dir, name))
		if rec.Verdict != verdict {
			t.Errorf("%s: verdict %s, want %s", name, rec.Verdict, verdict)
		}
		if rec.Schema != pipeline.Schema || rec.Provenance.ProcessedAt != "2026-12-01T00:00:00Z" {
			t.Errorf("%s: schema %q, processed_at %q", name, rec.Schema, rec.Provenance.ProcessedAt)
		}
		rec.Trace = nil
		got, err := rec.Marshal()
		if err != nil {
			t.Fatal(err)
		}
		golden := filepath.Join("..", "..", "testdata", "golden", name)
		if *update {
			if err := os.MkdirAll(filepath.Dir(golden), 0o755); err != nil {
				t.Fatal(err)
			}
			if err := os.WriteFile(golden, got, 0o644); err != nil {
				t.Fatal(err)
			}
			continue
		}
		exp, err := os.ReadFile(golden)
		if err != nil {
			t.Fatalf("%v (run go test ./cmd/lotgate -update to create it)", err)
		}
		if !bytes.Equal(got, exp) {
			t.Errorf("%s differs from %s; if the change is intended, run go test ./cmd/lotgate -update and review the diff", name, golden)
		}
	}
}

// Same input and pipeline, same record, byte for byte (trace included), here
// from run with one worker against the demo's run with two.
func TestDeterministic(t *testing.T) {
	t.Setenv("SOURCE_DATE_EPOCH", epoch)
	out := t.TempDir()
	inputs, _ := filepath.Glob(filepath.Join(shared, "input", "*.csv"))
	args := append([]string{"run", "--workers", "1", "-p", filepath.Join(shared, "input", "toluene-release.hcl"), "-o", out}, inputs...)
	if code, _, e := runCLI(t, args...); code != exitVerdict {
		t.Fatalf("run: exit %d (the demo holds a failing lot, so 1 is expected): %s", code, e)
	}
	for _, name := range demoRecords {
		_, x := readRecord(t, filepath.Join(shared, name))
		_, y := readRecord(t, filepath.Join(out, name))
		if !bytes.Equal(x, y) {
			t.Errorf("%s differs between two runs", name)
		}
	}
}

func writeFile(t *testing.T, dir, name, content string) string {
	t.Helper()
	p := filepath.Join(dir, name)
	if err := os.WriteFile(p, []byte(content), 0o644); err != nil {
		t.Fatal(err)
	}
	return p
}

// One bad file in a run of many: the others are processed, the bad one gets
// a one-line error naming file and line, the exit status says so, and
// nothing half-written is left behind.
func TestRunBadInputs(t *testing.T) {
	t.Setenv("SOURCE_DATE_EPOCH", epoch)
	pipe := filepath.Join(shared, "input", "toluene-release.hcl")
	good := filepath.Join(shared, "input", "T998-26-1141.csv")
	header := "time (s),signal (pA)\n"
	rows := func(n int, f func(i int) string) string {
		var b strings.Builder
		for i := range n {
			b.WriteString(f(i))
		}
		return b.String()
	}
	even := func(i int) string { return strconv.Itoa(i) + ".00,1.0\n" }
	cases := []struct {
		name, content, want string
	}{
		{"empty.csv", "", "empty"},
		{"header-only.csv", header, ""},
		{"text-cell.csv", header + rows(20, even) + "20.00,abc\n", ":22:"},
		{"nan.csv", header + rows(20, even) + "20.00,NaN\n", ":22:"},
		{"inf.csv", header + rows(20, even) + "20.00,+Inf\n", ":22:"},
		{"decreasing.csv", header + rows(20, even) + "19.00,1.0\n", ":22:"},
		{"repeated.csv", header + rows(20, even) + "19.00,1.0\n", ":22:"},
		{"uneven.csv", header + rows(20, even) + "25.00,1.0\n", "evenly spaced"},
		{"few-points.csv", header + rows(5, even), "5"},
		{"garbage.csv", "\x00\x01\x02\xff\xfe binary", "garbage.csv"},
	}
	out := t.TempDir()
	args := []string{"run", "-p", pipe, "-o", out, good}
	for _, c := range cases {
		args = append(args, writeFile(t, t.TempDir(), c.name, c.content))
	}
	code, stdout, stderr := runCLI(t, args...)
	if code != exitFileFail {
		t.Errorf("exit %d, want %d", code, exitFileFail)
	}
	if !strings.Contains(stdout, "T998-26-1141.csv") || !strings.Contains(stdout, "pass") {
		t.Errorf("the good file was not reported as processed:\n%s", stdout)
	}
	lines := strings.Split(strings.TrimSpace(stderr), "\n")
	if len(lines) != len(cases) {
		t.Fatalf("want one error line per bad file, got:\n%s", stderr)
	}
	for i, c := range cases {
		if !strings.Contains(lines[i], c.name) || !strings.Contains(lines[i], c.want) {
			t.Errorf("%s: error line %q should name the file and contain %q", c.name, lines[i], c.want)
		}
	}
	entries, _ := os.ReadDir(out)
	var names []string
	for _, e := range entries {
		names = append(names, e.Name())
	}
	if strings.Join(names, " ") != "T998-26-1141.json T998-26-1141.pdf T998-26-1141.xlsx" {
		t.Errorf("output folder holds %v, want only the good file's documents", names)
	}
}

func TestUsageAndPipelineErrors(t *testing.T) {
	dir := t.TempDir()
	bad := writeFile(t, dir, "bad.hcl", "pipeline \"x\" {\n  revision = 1\n}\nsmooth {\n  windw = 9\n}\n")
	data := writeFile(t, dir, "a.csv", "time,signal\n0,1\n")
	cases := []struct {
		args []string
		code int
		want string
	}{
		{[]string{"run", "-o", dir, data}, exitUsage, "no pipeline"},
		{[]string{"run", "-p", bad, data}, exitUsage, "no output folder"},
		{[]string{"run", "-p", bad, "-o", dir}, exitUsage, "no data files"},
		{[]string{"run", "-p", bad, "-o", dir, data}, exitUsage, `bad.hcl line 5`},
		{[]string{"run", "-p", filepath.Join(dir, "missing.hcl"), "-o", dir, data}, exitUsage, "missing.hcl"},
		{[]string{"check", bad}, exitUsage, `Did you mean "window"?`},
		{[]string{"frobnicate"}, exitUsage, "unknown command"},
		{[]string{"run", "--bogus"}, exitUsage, "flag provided but not defined"},
	}
	for _, c := range cases {
		code, _, stderr := runCLI(t, c.args...)
		if code != c.code || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: exit %d, stderr %q; want %d and %q", c.args, code, stderr, c.code, c.want)
		}
	}
	for _, cmd := range []string{"run", "check", "demo"} {
		code, stdout, _ := runCLI(t, cmd, "--help")
		if code != exitOK || !strings.Contains(stdout, "Usage: lotgate "+cmd) {
			t.Errorf("%s --help: exit %d, %q", cmd, code, stdout)
		}
	}
}

// A record is never overwritten silently: different content is refused
// unless --replace is given; identical content is left alone.
func TestNoSilentOverwrite(t *testing.T) {
	pipe := filepath.Join(shared, "input", "toluene-release.hcl")
	data := filepath.Join(shared, "input", "T998-26-1141.csv")
	out := t.TempDir()
	t.Setenv("SOURCE_DATE_EPOCH", "1")
	if code, _, e := runCLI(t, "run", "-p", pipe, "-o", out, data); code != exitOK {
		t.Fatalf("first run: %d %s", code, e)
	}
	if code, o, e := runCLI(t, "run", "-p", pipe, "-o", out, data); code != exitOK || !strings.Contains(o, "unchanged") {
		t.Errorf("same content: exit %d, %q %q", code, o, e)
	}
	t.Setenv("SOURCE_DATE_EPOCH", "2")
	if code, _, e := runCLI(t, "run", "-p", pipe, "-o", out, data); code != exitFileFail || !strings.Contains(e, "--replace") {
		t.Errorf("different content without --replace: exit %d, %q", code, e)
	}
	if code, _, e := runCLI(t, "run", "-p", pipe, "-o", out, "--replace", data); code != exitOK {
		t.Errorf("with --replace: exit %d, %q", code, e)
	}
}

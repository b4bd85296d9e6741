package replay

import (
	"context"
	"encoding/json"
	"errors"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"sync"
	"testing"
	"time"

	"lotgate/pipeline"
	"lotgate/pipeline/bundle"
)

const (
	r3      = "../../examples/toluene-release.hcl"
	r4      = "../../examples/toluene-release-r4.hcl"
	lot1141 = "../../examples/data/T998-26-1141.csv"
)

var at = time.Unix(1796083200, 0)

// demoRecords processes the passing demo lot once under revision 3 and once
// under revision 4 (its largest unknown limit tightened to 0.010 %).
var demoRecords = sync.OnceValues(func() ([2]*pipeline.Record, error) {
	var out [2]*pipeline.Record
	for i, path := range []string{r3, r4} {
		p, err := pipeline.Load(path)
		if err != nil {
			return out, err
		}
		if out[i], err = p.ProcessFile(context.Background(), lot1141, at); err != nil {
			return out, err
		}
	}
	return out, nil
})

// clone deep-copies a record through its JSON, as a record read from a file.
func clone(t *testing.T, rec *pipeline.Record) *pipeline.Record {
	t.Helper()
	data, err := rec.Marshal()
	if err != nil {
		t.Fatal(err)
	}
	var c pipeline.Record
	if err := json.Unmarshal(data, &c); err != nil {
		t.Fatal(err)
	}
	return &c
}

// mutable copies the parts of a record that the tests change.
func mutable(r *pipeline.Record) *pipeline.Record {
	c := *r
	c.Peaks = slices.Clone(r.Peaks)
	c.Limits = slices.Clone(r.Limits)
	tr := *r.Trace
	tr.Baseline = slices.Clone(r.Trace.Baseline)
	c.Trace = &tr
	return &c
}

func records(t *testing.T) (r3rec, r4rec *pipeline.Record) {
	t.Helper()
	recs, err := demoRecords()
	if err != nil {
		t.Fatal(err)
	}
	return clone(t, recs[0]), clone(t, recs[1])
}

func TestCompare(t *testing.T) {
	base, _ := records(t)
	if len(base.Peaks) == 0 || base.Trace == nil || len(base.Trace.Baseline) == 0 {
		t.Fatal("the demo record has no peaks or no baseline")
	}
	x := base.Peaks[0].Area
	// IEEE 754 binary64: one unit in the last place of x is at most 2⁻⁵²·|x|
	// (machine epsilon, from the standard's format parameters).
	const eps = 0x1p-52
	cases := []struct {
		name   string
		change func(r *pipeline.Record)
		tol    float64
		fields []string // the differing fields, in record order
		maxRel float64  // upper bound of MaxRel (0: exactly 0)
	}{
		{"identical", func(*pipeline.Record) {}, 0, nil, 0},
		{"ignored provenance", func(r *pipeline.Record) {
			r.Provenance.ProcessedAt, r.Provenance.Version, r.Provenance.BundleSHA256 = "2030-01-01T00:00:00Z", "9.9.9", "ab"
		}, 0, nil, 0},
		{"one ulp in a peak area", func(r *pipeline.Record) { r.Peaks[0].Area = math.Nextafter(x, math.Inf(1)) }, 0,
			[]string{"peaks[" + base.Peaks[0].Name + "].area"}, eps},
		{"one ulp within tolerance", func(r *pipeline.Record) { r.Peaks[0].Area = math.Nextafter(x, math.Inf(1)) }, 1e-15,
			nil, eps},
		{"verdict and limit status", func(r *pipeline.Record) {
			r.Verdict = "fail"
			r.Limits[0].Status = "fail"
		}, 0, []string{"limits[" + base.Limits[0].Name + "].status", "verdict"}, 0},
		{"limit missing", func(r *pipeline.Record) { r.Limits = r.Limits[1:] }, 0,
			[]string{"limits[" + base.Limits[0].Name + "]"}, 0},
		{"setting is no computed number", func(r *pipeline.Record) { r.Method.Revision = 4 }, 0,
			[]string{"method.revision"}, 0},
		{"two baseline points", func(r *pipeline.Record) {
			r.Trace.Baseline[10] *= 1.5
			r.Trace.Baseline[20] *= 1.5
		}, 0, []string{"trace.baseline[10]"}, 1},
		{"stored without trace", func(r *pipeline.Record) { r.Trace = nil }, 0, nil, 0},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			changed := mutable(base)
			c.change(changed)
			res, err := Compare(base, changed, c.tol)
			if err != nil {
				t.Fatal(err)
			}
			var got []string
			for _, d := range res.Diffs {
				got = append(got, d.Field)
			}
			if strings.Join(got, "|") != strings.Join(c.fields, "|") {
				t.Errorf("differing fields %q, want %q", got, c.fields)
			}
			if c.maxRel == 0 && res.MaxRel != 0 || res.MaxRel > c.maxRel {
				t.Errorf("largest relative difference %g at %s, want at most %g", res.MaxRel, res.MaxRelField, c.maxRel)
			}
			if res.Same() != (len(c.fields) == 0) {
				t.Errorf("Same() = %v with %d differences", res.Same(), len(res.Diffs))
			}
		})
	}
}

// Two changed baseline points show as one row at the first, with a count;
// the relative difference of ×1.5 is 1 − 1/1.5 = 1/3 (by hand).
func TestCompareListNote(t *testing.T) {
	base, _ := records(t)
	changed := mutable(base)
	changed.Trace.Baseline[10] = base.Trace.Baseline[10] * 1.5
	changed.Trace.Baseline[20] = base.Trace.Baseline[20] * 1.5
	res, err := Compare(base, changed, 0)
	if err != nil || len(res.Diffs) != 1 {
		t.Fatalf("%v, %+v", err, res)
	}
	d := res.Diffs[0]
	n := len(base.Trace.Baseline)
	if !strings.Contains(d.Note, "2 of "+strconv.Itoa(n)) || math.Abs(d.Rel-1.0/3) > 1e-15 || math.Abs(res.MaxRel-1.0/3) > 1e-15 {
		t.Errorf("row %+v, largest %g", d, res.MaxRel)
	}
}

// A record made by a changed pipeline (revision 4) replayed under revision
// 3 lists the fields the method change moves: the revision, the limit's
// maximum, its status and reason, and the verdict.
func TestReplayChangedPipeline(t *testing.T) {
	old3, old4 := records(t)
	res, err := Compare(old4, old3, 0)
	if err != nil {
		t.Fatal(err)
	}
	want := map[string][2]string{
		"method.revision":                {"4", "3"},
		"limits[Largest unknown].max":    {"0.010", "0.030"},
		"limits[Largest unknown].status": {"fail", "pass"},
		"verdict":                        {"fail", "pass"},
	}
	found := 0
	for _, d := range res.Diffs {
		if w, ok := want[d.Field]; ok {
			found++
			if d.Old != w[0] || d.New != w[1] {
				t.Errorf("%s: %s → %s, want %s → %s", d.Field, d.Old, d.New, w[0], w[1])
			}
		}
	}
	if found != len(want) || res.MaxRel != 0 {
		t.Errorf("found %d of %d expected fields in %+v; largest relative difference %g (the data are the same, so 0)", found, len(want), res.Diffs, res.MaxRel)
	}
}

func TestAssess(t *testing.T) {
	old3, new4 := records(t)
	res, err := Compare(old3, new4, 0)
	if err != nil {
		t.Fatal(err)
	}
	row := Assess("records/T998-26-1141.json", old3, new4, res)
	if row.Record != "T998-26-1141.json" || row.Lot != "T998-26-1141" || row.Sample != "T998-26-1141-A" ||
		row.OldVerdict != "pass" || row.NewVerdict != "fail" || !row.VerdictChanged() {
		t.Errorf("row %+v", row)
	}
	if len(row.Limits) != 1 {
		t.Fatalf("changed limits %+v, want only Largest unknown", row.Limits)
	}
	if got := row.Limits[0].String(); got != "Largest unknown: 0.015 (max 0.030) pass → 0.015 (max 0.010) fail" {
		t.Errorf("change %q", got)
	}
	if len(row.Flags) != 0 {
		t.Errorf("flags %q; only a limit changed", row.Flags)
	}
}

func TestFailed(t *testing.T) {
	old, _ := records(t)
	row := Failed("records/T998-26-1141.json", old, errors.New("first line\nsecond line"))
	if row.Record != "T998-26-1141.json" || row.Lot != "T998-26-1141" || row.OldVerdict != "pass" ||
		row.Error != "first line; second line" || row.VerdictChanged() {
		t.Errorf("row %+v", row)
	}
	if row := Failed("broken.json", nil, errors.New("not a record")); row.Record != "broken.json" || row.Error != "not a record" {
		t.Errorf("row of an unreadable record %+v", row)
	}
}

func TestDiffPipelines(t *testing.T) {
	dir := t.TempDir()
	write := func(name, content string) string {
		p := filepath.Join(dir, name)
		if err := os.MkdirAll(filepath.Dir(p), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(p, []byte(content), 0o644); err != nil {
			t.Fatal(err)
		}
		return p
	}
	head := "pipeline \"m\" {\n  revision = 1\n}\n"
	smooth := "smooth {\n  window = 11\n  order = 2\n}\n"
	baseline := "baseline {\n  lambda = 1e7\n}\n"
	limit := "limit \"Benzene\" {\n  value = component.benzene.percent\n  max = 0.010\n}\n"
	identify := "identify {\n  component \"benzene\" {\n    rt = 3.62\n    window = 0.05\n  }\n}\n"
	cases := []struct {
		name, a, b string
		want       []Change
	}{
		{"layout and comments only", head + smooth + limit,
			"# a comment\n" + head + "smooth {\n  window   = 11 # eleven points\n\n  order = 2\n}\n" + limit, nil},
		{"list layout", head + "report {\n  formats = [\"json\",\"pdf\"]\n}\n",
			head + "report {\n  formats = [\n    \"json\",\n    \"pdf\",\n  ]\n}\n", nil},
		{"changed limit", head + limit, head + strings.Replace(limit, "0.010", "0.005", 1),
			[]Change{{`limit "Benzene"`, "max", "0.010", "0.005"}}},
		{"digits as written matter", head + limit, head + strings.Replace(limit, "0.010", "0.01", 1),
			[]Change{{`limit "Benzene"`, "max", "0.010", "0.01"}}},
		{"setting removed", head + smooth, head + "smooth {\n  window = 11\n}\n",
			[]Change{{"smooth", "order", "2", Absent}}},
		{"nested block", head + "detect {}\nintegrate {}\n" + identify, head + "detect {}\nintegrate {}\n" + strings.Replace(identify, "3.62", "3.60", 1),
			[]Change{{`identify / component "benzene"`, "rt", "3.62", "3.60"}}},
		{"step added", head + smooth, head + smooth + baseline,
			[]Change{{"steps", "order", "smooth", "smooth → baseline"}, {"baseline", "(block)", Absent, "present"}, {"baseline", "lambda", Absent, "1e7"}}},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			a, err := bundle.OpenAny(write("a/p.hcl", c.a))
			if err != nil {
				t.Fatal(err)
			}
			b, err := bundle.OpenAny(write("b/p.hcl", c.b))
			if err != nil {
				t.Fatal(err)
			}
			got, err := DiffPipelines(a, b)
			if err != nil {
				t.Fatal(err)
			}
			if len(got) != len(c.want) {
				t.Fatalf("changes %+v, want %+v", got, c.want)
			}
			for i := range got {
				if got[i] != c.want[i] {
					t.Errorf("change %d: %+v, want %+v", i, got[i], c.want[i])
				}
			}
		})
	}
}

// Revision 3 against revision 4 of the demo: the revision and the tightened
// limit, nothing else (r4's added comment lines are no difference); and a
// changed logo shows as a file whose digest differs.
func TestDiffDemoRevisions(t *testing.T) {
	a, err := bundle.OpenAny(r3)
	if err != nil {
		t.Fatal(err)
	}
	b, err := bundle.OpenAny(r4)
	if err != nil {
		t.Fatal(err)
	}
	got, err := DiffPipelines(a, b)
	if err != nil {
		t.Fatal(err)
	}
	want := []Change{
		{`pipeline "toluene-release"`, "revision", "3", "4"},
		{`limit "Largest unknown"`, "max", "0.030", "0.010"},
	}
	if len(got) != len(want) || got[0] != want[0] || got[1] != want[1] {
		t.Errorf("changes %+v, want %+v", got, want)
	}
	dir := t.TempDir()
	src, err := os.ReadFile(r3)
	if err != nil {
		t.Fatal(err)
	}
	for name, content := range map[string][]byte{"toluene-release.hcl": src, "okkerby-logo.png": []byte("another logo")} {
		if err := os.WriteFile(filepath.Join(dir, name), content, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	c, err := bundle.OpenAny(filepath.Join(dir, "toluene-release.hcl"))
	if err != nil {
		t.Fatal(err)
	}
	got, err = DiffPipelines(a, c)
	if err != nil || len(got) != 1 || got[0].Where != "files" || got[0].Name != "okkerby-logo.png" {
		t.Errorf("logo change: %v, %+v", err, got)
	}
}

func TestFinder(t *testing.T) {
	rec, _ := records(t)
	src, err := os.ReadFile(lot1141)
	if err != nil {
		t.Fatal(err)
	}
	write := func(path string, data []byte) string {
		if err := os.MkdirAll(filepath.Dir(path), 0o755); err != nil {
			t.Fatal(err)
		}
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		return path
	}
	changed := append([]byte(nil), src...)
	changed[len(changed)-2] ^= 1
	dir := t.TempDir()
	next := write(filepath.Join(dir, "next", "T998-26-1141.csv"), src)
	inInput := write(filepath.Join(dir, "sub", "input", "T998-26-1141.csv"), src)
	renamed := write(filepath.Join(dir, "renamed", "copy-of-run.txt"), src)
	write(filepath.Join(dir, "renamed", "T998-26-1141.csv"), changed)
	write(filepath.Join(dir, "altered", "T998-26-1141.csv"), changed)
	elsewhere := write(filepath.Join(dir, "data", "T998-26-1141.csv"), src)
	cases := []struct {
		name   string
		dirs   []string
		record string
		want   string // the path found, or a piece of the error
	}{
		{"next to the record", nil, filepath.Join(dir, "next", "r.json"), next},
		{"in its input folder", nil, filepath.Join(dir, "sub", "r.json"), inInput},
		{"renamed copy found by digest", nil, filepath.Join(dir, "renamed", "r.json"), renamed},
		{"altered data refused", nil, filepath.Join(dir, "altered", "r.json"), "its bytes differ"},
		{"--data folder", []string{filepath.Join(dir, "data")}, filepath.Join(dir, "altered", "r.json"), elsewhere},
		{"nothing there", nil, filepath.Join(dir, "empty", "r.json"), "give the data file"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			f := &Finder{Dirs: c.dirs}
			got, err := f.Find(c.record, rec)
			if err != nil {
				got = err.Error()
			}
			if !strings.Contains(got, c.want) {
				t.Errorf("got %q, want %q", got, c.want)
			}
		})
	}
	if err := VerifyData(filepath.Join(dir, "altered", "T998-26-1141.csv"), rec); err == nil || !strings.Contains(err.Error(), "altered") {
		t.Errorf("VerifyData of altered data: %v", err)
	}
}

// FIPS 180-2, Appendix B.1: SHA-256("abc").
func TestFileSHA256(t *testing.T) {
	p := filepath.Join(t.TempDir(), "abc")
	if err := os.WriteFile(p, []byte("abc"), 0o644); err != nil {
		t.Fatal(err)
	}
	got, err := FileSHA256(p)
	if want := "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"; err != nil || got != want {
		t.Errorf("got %s, %v; want %s", got, err, want)
	}
}

func TestRerunRefusesOtherData(t *testing.T) {
	rec, _ := records(t)
	p, err := pipeline.Load(r3)
	if err != nil {
		t.Fatal(err)
	}
	other := "../../examples/data/T998-26-1142.csv"
	if _, err := Rerun(context.Background(), p, rec, other); err == nil || !strings.Contains(err.Error(), "T998-26-1142.csv") {
		t.Errorf("re-run on another lot's data: %v", err)
	}
	// The same bytes under another name are the record's raw data: the
	// re-run keeps the record's input file name and is identical.
	src, err := os.ReadFile(lot1141)
	if err != nil {
		t.Fatal(err)
	}
	renamed := filepath.Join(t.TempDir(), "renamed.txt")
	if err := os.WriteFile(renamed, src, 0o644); err != nil {
		t.Fatal(err)
	}
	again, err := Rerun(context.Background(), p, rec, renamed)
	if err != nil {
		t.Fatal(err)
	}
	if res, err := Compare(rec, again, 0); err != nil || !res.Same() || res.MaxRel != 0 {
		t.Errorf("re-run of the same data and pipeline differs: %v %+v", err, res)
	}
}

func FuzzParseTree(f *testing.F) {
	f.Add([]byte(`{"a": [1, 2.5e-3, {"name": "x", "v": null}], "b": "s", "c": true}`))
	f.Add([]byte(`[{"name": "a"}, {"name": "a"}]`))
	f.Add([]byte(`{"a": 1} {}`))
	f.Add([]byte(`1e400`))
	f.Fuzz(func(t *testing.T, data []byte) {
		n, err := parseTree(data)
		if err != nil {
			return
		}
		c := &comparer{}
		c.walk("", n, n)
		if len(c.res.Diffs) != 0 || c.res.MaxRel != 0 {
			t.Fatalf("a value differs from itself: %+v", c.res)
		}
		if _, err := parseTree([]byte(n.String())); n.kind >= kindArray && err != nil {
			t.Fatalf("rendered JSON %q does not parse: %v", n.String(), err)
		}
	})
}

func BenchmarkCompare(b *testing.B) {
	recs, err := demoRecords()
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		if _, err := Compare(recs[0], recs[1], 0); err != nil {
			b.Fatal(err)
		}
	}
}

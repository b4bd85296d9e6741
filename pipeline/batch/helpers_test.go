package batch

import (
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"testing"
	"time"

	"lotgate/pipeline"
)

// testAt is the processing time of the test records.
var testAt = time.Date(2026, 12, 1, 0, 0, 0, 0, time.UTC)

// testPipeline is a small method for synthetic runs of 5 min at 10 Hz on a
// flat baseline: A (calibrated, 1 mg/L gives 2 pA·s), B and C (a close pair
// for resolution), quantified as area %.
const testPipeline = `pipeline "batch-test" {
  revision = 1
}
input {
  signal_unit = "pA"
}
detect {
  min_snr = 5
  noise {
    from = 0.2
    to   = 1.2
  }
}
integrate {
}
identify {
  component "A" {
    rt     = 2.0
    window = 0.1
  }
  component "B" {
    rt     = 3.0
    window = 0.1
  }
  component "C" {
    rt     = 3.3
    window = 0.1
  }
}
quantify {
  method = "area-percent"
}
calibration {
  unit      = "mg/L"
  model     = "linear"
  weighting = "1/x"
  component "A" {}
}
replicates {
  count   = 2
  max_rsd = 5
}
limit "A" {
  value = component.A.amount
  max   = 40
  unit  = "mg/L"
  when  = meta.kind == "sample"
}
limit "B share" {
  value = component.B.percent
  max   = 60
  unit  = "%"
  when  = meta.kind == "sample"
}
`

// suitabilityBlock is the test pipeline's suitability block.
const suitabilityBlock = `suitability {
  resolution {
    between = ["B", "C"]
    min     = 1.5
  }
  precision {
    component      = "A"
    max_rsd        = 2
    min_injections = 3
  }
  blank {
    components = ["A"]
    max_snr    = 3
  }
  drift {
    max = 5
  }
}
`

// testRNG is a small deterministic normal generator (splitmix64 and
// Box–Muller) for the synthetic noise.
type testRNG struct{ s uint64 }

func (r *testRNG) normal() float64 {
	u := func() float64 {
		r.s += 0x9e3779b97f4a7c15
		z := r.s
		z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
		z = (z ^ (z >> 27)) * 0x94d049bb133111eb
		return (float64((z^(z>>31))>>11) + 0.5) / (1 << 53)
	}
	return math.Sqrt(-2*math.Log(u())) * math.Cos(2*math.Pi*u())
}

// run describes one synthetic injection: its sequence role and attributes,
// and the areas (pA·s) of A, B and C (0: absent).
type run struct {
	id, role, attrs string
	kind            string // the data file's "kind" metadata
	a, b, c         float64
}

// writeSequence writes the data files and the sequence file of runs into
// dir and returns the sequence file's path. standards are written as they
// are, before the injections.
func writeSequence(t testing.TB, dir, standards string, runs []run) string {
	t.Helper()
	var seq strings.Builder
	seq.WriteString("sequence \"test\" {\n  lot = \"L1\"\n}\n" + standards)
	for i, r := range runs {
		name := fmt.Sprintf("%02d-%s.csv", i+1, r.id)
		if err := os.WriteFile(filepath.Join(dir, name), chromatogram(uint64(i+1), r), 0o644); err != nil {
			t.Fatal(err)
		}
		fmt.Fprintf(&seq, "injection %q {\n  file = %q\n  role = %q\n  %s\n}\n", r.id, name, r.role, r.attrs)
	}
	path := filepath.Join(dir, "test.sequence.hcl")
	if err := os.WriteFile(path, []byte(seq.String()), 0o644); err != nil {
		t.Fatal(err)
	}
	return path
}

// chromatogram renders a run: Gaussian peaks (σ 0.02 min) on a flat
// baseline with white noise of SD 0.01 pA, 5 min at 10 Hz.
func chromatogram(seed uint64, r run) []byte {
	var b strings.Builder
	fmt.Fprintf(&b, "# kind: %s\ntime (s),signal (pA)\n", r.kind)
	rng := &testRNG{s: seed}
	const sigma = 0.02 // min
	peaks := [][2]float64{{2.0, r.a}, {3.0, r.b}, {3.3, r.c}}
	for i := range 3001 {
		tm := float64(i) / 600
		y := 0.01 * rng.normal()
		for _, p := range peaks {
			if p[1] > 0 {
				h := p[1] / (sigma * 60 * math.Sqrt(2*math.Pi)) // area in pA·s
				y += h * math.Exp(-0.5*(tm-p[0])*(tm-p[0])/(sigma*sigma))
			}
		}
		fmt.Fprintf(&b, "%s,%s\n", strconv.FormatFloat(tm*60, 'f', 2, 64), strconv.FormatFloat(y, 'f', 5, 64))
	}
	return []byte(b.String())
}

// calStandards declares five standards of A: 10, 20, 30, 40, 50 mg/L.
const calStandards = `standard "S1" {
  level   = 1
  amounts = { A = 10 }
}
standard "S2" {
  level   = 2
  amounts = { A = 20 }
}
standard "S3" {
  level   = 3
  amounts = { A = 30 }
}
standard "S4" {
  level   = 4
  amounts = { A = 40 }
}
standard "S5" {
  level   = 5
  amounts = { A = 50 }
}
`

// standardRuns are the blank, the five calibration standards (A at 2 pA·s
// per mg/L) and three suitability injections of S3 with B and C resolved.
func standardRuns() []run {
	runs := []run{{id: "blank", role: RoleBlank, kind: "blank"}}
	for lv := 1; lv <= 5; lv++ {
		runs = append(runs, run{id: fmt.Sprintf("cal%d", lv), role: RoleCalibration, kind: "standard",
			attrs: fmt.Sprintf("standard = \"S%d\"", lv), a: 20 * float64(lv)})
	}
	for k := range 3 {
		runs = append(runs, run{id: fmt.Sprintf("sst%d", k+1), role: RoleSuitability, kind: "standard",
			attrs: `standard = "S3"`, a: 60 * (1 + 0.002*float64(k-1)), b: 20, c: 20})
	}
	return runs
}

// sampleRuns are sample X in two replicates with A at amount mg/L.
func sampleRuns(sample string, amount float64) []run {
	var runs []run
	for rep := 1; rep <= 2; rep++ {
		runs = append(runs, run{id: fmt.Sprintf("%s-%d", sample, rep), role: RoleSample, kind: "sample",
			attrs: fmt.Sprintf("sample = %q\n  replicate = %d", sample, rep),
			a:     2 * amount * (1 + 0.003*float64(2*rep-3)), b: 30, c: 25})
	}
	return runs
}

// mustPipeline parses a pipeline or stops the test.
func mustPipeline(t testing.TB, src string) *pipeline.Pipeline {
	t.Helper()
	p, err := pipeline.Parse([]byte(src), "batch-test.hcl")
	if err != nil {
		t.Fatal(err)
	}
	return p
}

// runSequence loads the test pipeline (with extra blocks appended) and
// processes the runs as a sequence.
func runSequence(t testing.TB, extra string, standards string, runs []run, workers int) *Result {
	t.Helper()
	p := mustPipeline(t, testPipeline+extra)
	path := writeSequence(t, t.TempDir(), standards, runs)
	seq, err := Load(path)
	if err != nil {
		t.Fatal(err)
	}
	res, err := Run(context.Background(), p, seq, Options{Workers: workers, At: testAt})
	if err != nil {
		t.Fatal(err)
	}
	return res
}

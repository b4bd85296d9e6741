package pipeline

import (
	"context"
	"errors"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"lotgate/examples"
	"lotgate/pipeline/input"
)

// flat writes n evenly spaced points of a small synthetic peak.
func flat(n int) string {
	var b strings.Builder
	b.WriteString("time (s),signal (pA)\n")
	for i := range n {
		x := float64(i) / 10
		fmt.Fprintf(&b, "%.1f,%.4f\n", x, 1+5*math.Exp(-(x-float64(n)/20)*(x-float64(n)/20)))
	}
	return b.String()
}

func TestProcessErrors(t *testing.T) {
	cases := []struct {
		name, pipe, data, want string
	}{
		{"window wider than the trace", minimal + "smooth {\n  window = 21\n}\n", flat(16),
			"window of 21 points is wider than the trace of 16 points"},
		{"file over the size limit", minimal + "input {\n  max_mb = 0.0001\n}\n", flat(2000),
			"larger than the limit"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p, err := Parse([]byte(c.pipe), "m.hcl")
			if err != nil {
				t.Fatal(err)
			}
			path := filepath.Join(t.TempDir(), "run.csv")
			if err := os.WriteFile(path, []byte(c.data), 0o644); err != nil {
				t.Fatal(err)
			}
			_, err = p.ProcessFile(context.Background(), path, time.Unix(0, 0))
			if err == nil || !strings.Contains(err.Error(), c.want) || !strings.Contains(err.Error(), "run.csv") {
				t.Errorf("got %v, want an error naming run.csv and saying %q", err, c.want)
			}
		})
	}
}

func TestRunTime(t *testing.T) {
	t.Setenv("SOURCE_DATE_EPOCH", "1796083200")
	at, err := RunTime()
	if err != nil || at.Format(time.RFC3339) != "2026-12-01T00:00:00Z" {
		t.Errorf("RunTime = %v, %v", at, err)
	}
	t.Setenv("SOURCE_DATE_EPOCH", "yesterday")
	if _, err := RunTime(); err == nil {
		t.Error("an unparsable SOURCE_DATE_EPOCH must be an error")
	}
}

// demoPipeline and demoData load the bundled demo for benchmarks.
func demoPipeline(b *testing.B) *Pipeline {
	p, err := Load(filepath.Join("..", "examples", examples.Pipeline))
	if err != nil {
		b.Fatal(err)
	}
	return p
}

// BenchmarkProcess is the whole analysis of the demo lot (36,001 points:
// 30 min at 20 Hz), file reading included.
func BenchmarkProcess(b *testing.B) {
	p := demoPipeline(b)
	data, err := examples.FS.ReadFile("data/T998-26-1141.csv")
	if err != nil {
		b.Fatal(err)
	}
	b.SetBytes(int64(len(data)))
	for b.Loop() {
		if _, err := p.Process(context.Background(), "T998-26-1141.csv", data, time.Unix(0, 0)); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkAnalysis is the whole analysis of the demo lot, file reading
// excluded: every step, the limits and the record.
func BenchmarkAnalysis(b *testing.B) {
	p := demoPipeline(b)
	data, err := examples.FS.ReadFile("data/T998-26-1141.csv")
	if err != nil {
		b.Fatal(err)
	}
	d, err := input.Read(strings.NewReader(string(data)), "x.csv", p.Input)
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		if _, err := p.analyse(context.Background(), "x.csv", "", d, time.Unix(0, 0)); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkAnalysis1M is BenchmarkAnalysis on 1,000,000 points (see
// BenchmarkProcess1M for the trace).
func BenchmarkAnalysis1M(b *testing.B) {
	p := demoPipeline(b)
	d, err := input.Read(strings.NewReader(string(bigTrace(b, p))), "big.csv", p.Input)
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		if _, err := p.analyse(context.Background(), "big.csv", "", d, time.Unix(0, 0)); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkRead is the file reading alone, to subtract from BenchmarkProcess.
func BenchmarkRead(b *testing.B) {
	p := demoPipeline(b)
	data, err := examples.FS.ReadFile("data/T998-26-1141.csv")
	if err != nil {
		b.Fatal(err)
	}
	for b.Loop() {
		if _, err := input.Read(strings.NewReader(string(data)), "x.csv", p.Input); err != nil {
			b.Fatal(err)
		}
	}
}

// BenchmarkProcess1M is the whole analysis of a 1,000,000-point run: the
// demo lot's 30 minutes repeated, sampled at about 555 Hz. It shows whether
// the cost grows linearly with the points.
func BenchmarkProcess1M(b *testing.B) {
	p := demoPipeline(b)
	data := bigTrace(b, p)
	b.ResetTimer()
	for b.Loop() {
		if _, err := p.Process(context.Background(), "big.csv", data, time.Unix(0, 0)); err != nil {
			b.Fatal(err)
		}
	}
}

// bigTrace is the demo lot's 30 minutes interpolated onto 1,000,000 points.
func bigTrace(b *testing.B, p *Pipeline) []byte {
	src, err := examples.FS.ReadFile("data/T998-26-1141.csv")
	if err != nil {
		b.Fatal(err)
	}
	d, err := input.Read(strings.NewReader(string(src)), "x.csv", p.Input)
	if err != nil {
		b.Fatal(err)
	}
	const n = 1_000_000
	var sb strings.Builder
	sb.WriteString("time (s),signal (pA)\n")
	m := len(d.Trace.Signal)
	for i := range n {
		// Linear interpolation of the demo trace onto n points.
		x := float64(i) * float64(m-1) / float64(n-1)
		k := min(int(x), m-2)
		f := x - float64(k)
		y := d.Trace.Signal[k]*(1-f) + d.Trace.Signal[k+1]*f
		fmt.Fprintf(&sb, "%.6f,%.4f\n", float64(i)*1800/float64(n-1), y)
	}
	return []byte(sb.String())
}

func TestProcessContextCancelled(t *testing.T) {
	p, err := Parse([]byte(minimal+"smooth {\n}\n"), "m.hcl")
	if err != nil {
		t.Fatal(err)
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if _, err := p.Process(ctx, "x.csv", []byte(flat(100)), time.Unix(0, 0)); !errors.Is(err, context.Canceled) {
		t.Errorf("want context.Canceled, got %v", err)
	}
}

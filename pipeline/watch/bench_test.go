package watch

import (
	"context"
	"fmt"
	"os"
	"path/filepath"
	"testing"
	"time"

	"lotgate/examples/synth"
	"lotgate/pipeline"
)

// BenchmarkWatch measures the watcher end to end on small files (400
// points, JSON record only): take, claim, process, write, archive, with
// every ledger entry synced. One op is one file.
func BenchmarkWatch(b *testing.B) {
	dir := b.TempDir()
	inbox, out, pipePath := filepath.Join(dir, "inbox"), filepath.Join(dir, "out"), filepath.Join(dir, "p.hcl")
	os.Mkdir(inbox, 0o755)
	os.WriteFile(pipePath, []byte(synth.SmallPipeline), 0o644)
	p, err := pipeline.Load(pipePath)
	if err != nil {
		b.Fatal(err)
	}
	for i := range b.N {
		os.WriteFile(filepath.Join(inbox, fmt.Sprintf("f%07d.csv", i)), synth.Small(i), 0o644)
	}
	w, err := New(Options{Pipeline: p, Inbox: inbox, Out: out, Workers: 2, Settle: time.Millisecond, Poll: true, UntilIdle: true})
	if err != nil {
		b.Fatal(err)
	}
	defer w.Close()
	b.ReportAllocs()
	b.ResetTimer()
	sum, err := w.Run(context.Background())
	b.StopTimer()
	if err != nil || sum.Certified+sum.Quarantined != b.N {
		b.Fatalf("summary %+v, %v; want %d files", sum, err, b.N)
	}
	b.ReportMetric(float64(b.N)/b.Elapsed().Seconds(), "files/s")
}

package reports

import (
	"io"
	"testing"

	"lotgate/pipeline"
)

// xlsxExpand returns a copy of rec whose trace holds n points over the same
// time span, the demo signals repeated point by point.
func xlsxExpand(rec *pipeline.Record, n int) *pipeline.Record {
	out := *rec
	tr := *rec.Trace
	src := rec.Trace
	grow := func(s []float64) []float64 {
		if len(s) == 0 {
			return nil
		}
		g := make([]float64, n)
		for i := range g {
			g[i] = s[i*len(s)/n]
		}
		return g
	}
	tr.Raw, tr.Processed, tr.Baseline = grow(src.Raw), grow(src.Processed), grow(src.Baseline)
	tr.Points = n
	tr.IntervalMin = src.IntervalMin * float64(src.Points-1) / float64(n-1)
	out.Trace = &tr
	return &out
}

func benchmarkXLSX(b *testing.B, rec *pipeline.Record) {
	b.ReportAllocs()
	for b.Loop() {
		if err := WriteXLSX(io.Discard, rec); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkWriteXLSX(b *testing.B) {
	demo := xlsxDemoRecord(b, "T998-26-1141.csv")
	b.Run("36001-points", func(b *testing.B) { benchmarkXLSX(b, demo) })
	b.Run("1000000-points", func(b *testing.B) { benchmarkXLSX(b, xlsxExpand(demo, 1_000_000)) })
}

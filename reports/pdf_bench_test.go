package reports

import (
	"io"
	"math"
	"strconv"
	"testing"

	"lotgate/pipeline"
)

// expandTrace returns a copy of rec whose trace has n points over the same
// time span, each new point taken from the nearest original one.
func expandTrace(rec *pipeline.Record, n int) *pipeline.Record {
	out := *rec
	tr := *rec.Trace
	old := len(tr.Raw)
	span := float64(old-1) * tr.IntervalMin
	resample := func(v []float64) []float64 {
		if len(v) == 0 {
			return nil
		}
		r := make([]float64, n)
		for i := range r {
			r[i] = v[int(math.Round(float64(i)*float64(old-1)/float64(n-1)))]
		}
		return r
	}
	tr.Raw, tr.Processed, tr.Baseline = resample(tr.Raw), resample(tr.Processed), resample(tr.Baseline)
	tr.Points, tr.IntervalMin = n, span/float64(n-1)
	out.Trace = &tr
	return &out
}

func BenchmarkWritePDF(b *testing.B) {
	rec, logo := demoRecord(b, "T998-26-1141.csv")
	for _, c := range []struct {
		name string
		rec  *pipeline.Record
	}{
		{"36000", rec},
		{"1000000", expandTrace(rec, 1_000_000)},
	} {
		b.Run(c.name, func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if err := WritePDF(io.Discard, c.rec, logo); err != nil {
					b.Fatal(err)
				}
			}
		})
	}
}

func BenchmarkMinMaxColumns(b *testing.B) {
	for _, n := range []int{36_000, 1_000_000} {
		y := make([]float64, n)
		for i := range y {
			y[i] = math.Sin(float64(i) * 0.001)
		}
		b.Run(strconv.Itoa(n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				minMaxColumns(y, 2126)
			}
		})
	}
}

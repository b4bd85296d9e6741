package steps

import (
	"context"
	"fmt"
	"testing"
)

// pkBenchRun returns a synthetic chromatogram of n points at 20 Hz with a
// peak every two minutes (heights from 40 to 20,000 noise SDs, some
// tailing) on noise of SD 1.
func pkBenchRun(n int) *Run {
	minutes := float64(n) / 1200
	var shapes []pkShape
	heights := []float64{20000, 40, 900, 150, 3000, 60, 500}
	for k := 0; float64(k)*2+1 < minutes; k++ {
		shapes = append(shapes, pkShape{heights[k%len(heights)], float64(k)*2 + 1, 0.02 + 0.002*float64(k%5), 0.01 * float64(k%4)})
	}
	return pkRun(minutes, 20, shapes, nil, 1, 11)
}

// BenchmarkDetectIntegrate measures detect followed by integrate on 30 min
// at 20 Hz (36,000 points, 15 peaks) and on 1,000,000 points (417 peaks).
func BenchmarkDetectIntegrate(b *testing.B) {
	for _, n := range []int{36000, 1000000} {
		r := pkBenchRun(n)
		r.Done = []string{"detect"}
		d, s := &Detect{MinSNR: 3}, &Integrate{}
		ctx := context.Background()
		b.Run(fmt.Sprint(n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if err := d.Run(ctx, r); err != nil {
					b.Fatal(err)
				}
				if err := s.Run(ctx, r); err != nil {
					b.Fatal(err)
				}
			}
			b.ReportMetric(float64(len(r.Peaks)), "peaks")
		})
	}
}

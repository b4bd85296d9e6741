package steps

import (
	"context"
	"fmt"
	"testing"
)

// BenchmarkSteps measures each remaining step on its own, on the same
// synthetic chromatograms as BenchmarkDetectIntegrate (36,000 points = 30
// min at 20 Hz, and 1,000,000 points), with the demo pipeline's settings.
func BenchmarkSteps(b *testing.B) {
	ctx := context.Background()
	for _, n := range []int{36000, 1000000} {
		r := pkBenchRun(n)
		smooth := &Smooth{Method: SavitzkyGolay, Window: 11, Order: 2}
		base := &Baseline{Lambda: 1e8, Asymmetry: 0.001, Iterations: 50, Tolerance: 0.01, Clip: 3, MaxPoints: 4000}
		for _, s := range []Step{smooth, base, &Detect{MinSNR: 10}, &Integrate{}} {
			if err := s.Run(ctx, r); err != nil {
				b.Fatal(err)
			}
			r.Done = append(r.Done, s.Name())
		}
		var comps []Component
		for i, p := range r.Peaks {
			if i%2 == 0 {
				comps = append(comps, Component{Name: fmt.Sprint("c", i), ExpectedRT: p.RT, Window: 0.05, RRF: 1})
			}
		}
		identify := &Identify{Components: comps}
		quantify := &Quantify{Method: Normalized, UnknownRRF: 1, ReportingThreshold: 0.05}
		for _, s := range []Step{smooth, base, identify, quantify} {
			b.Run(fmt.Sprintf("%s/%d", s.Name(), n), func(b *testing.B) {
				b.ReportAllocs()
				for b.Loop() {
					if err := s.Run(ctx, r); err != nil {
						b.Fatal(err)
					}
				}
			})
		}
	}
}

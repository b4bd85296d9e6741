package batch

import (
	"fmt"
	"math"
	"testing"

	"lotgate/pipeline"
)

// BenchmarkNoiseRange measures the signal-to-noise gate's noise range over
// a window of the whole trace (36,000 and 1,000,000 points).
func BenchmarkNoiseRange(b *testing.B) {
	for _, n := range []int{36000, 1000000} {
		rng := &testRNG{s: 1}
		sig := make([]float64, n)
		base := make([]float64, n)
		for i := range sig {
			base[i] = 3 + 1e-4*float64(i)
			sig[i] = base[i] + 0.05*rng.normal()
		}
		tr := &pipeline.TraceRec{Points: n, StartMin: 0, IntervalMin: 1.0 / 1200, Raw: sig, Processed: sig, Baseline: base}
		to := float64(n-1) / 1200
		b.Run(fmt.Sprintf("n=%d", n), func(b *testing.B) {
			b.ReportAllocs()
			for b.Loop() {
				if h, ok := noiseRange(tr, 0, to); !ok || !(h > 0) {
					b.Fatal("no noise range")
				}
			}
		})
	}
}

// BenchmarkEvaluate measures the sequence-level evaluation (calibration,
// gates, amounts, limits, replicates, lot records) of a 40-injection
// sequence whose injections are already processed.
func BenchmarkEvaluate(b *testing.B) {
	p := gatePipeline(b, `calibration {
  unit      = "mg/L"
  weighting = "1/x"
  component "A" {}
}
suitability {
  resolution {
    between = ["A", "B"]
    min     = 1
  }
  precision {
    component = "A"
    max_rsd   = 5
    min_injections = 3
  }
  drift {
    max = 5
  }
}
replicates {
  count = 3
}
limit "A" {
  value = component.A.amount
  max   = 100
}
`)
	mk := func(n int, role string, a float64) *Outcome {
		one, two := 1, 2
		rec := &pipeline.Record{
			Peaks: []pipeline.PeakRec{{Number: 1, Component: "A", RTMin: 10, WidthHalfMin: ptr(0.2), Height: 50, Area: a},
				{Number: 2, Component: "B", RTMin: 10.5, WidthHalfMin: ptr(0.2), Height: 40, Area: 80}},
			Components: []pipeline.ComponentRec{{Name: "A", Status: "found", Peak: &one, Area: ptr(a)},
				{Name: "B", Status: "found", Peak: &two, Area: ptr(80)}},
		}
		return &Outcome{Injection: &Injection{Number: n, ID: fmt.Sprint(n), Role: role, Lot: "L", Dilution: 1}, Record: rec}
	}
	build := func() []*Outcome {
		var outs []*Outcome
		std := func(x float64) *Standard {
			return &Standard{Name: fmt.Sprint(x), Amounts: []StandardAmount{{Component: "A", Amount: x}}}
		}
		for lv := 1; lv <= 5; lv++ {
			o := mk(len(outs)+1, RoleCalibration, 2*float64(lv*10))
			o.Standard = std(float64(lv * 10))
			outs = append(outs, o)
		}
		for k := range 5 {
			o := mk(len(outs)+1, RoleSuitability, 60*(1+0.001*float64(k)))
			o.Standard = std(30)
			outs = append(outs, o)
		}
		for len(outs) < 39 {
			o := mk(len(outs)+1, RoleSample, 50+math.Mod(float64(len(outs)), 3))
			o.Sample, o.Replicate = fmt.Sprint("S", len(outs)/3), len(outs)%3+1
			outs = append(outs, o)
		}
		o := mk(40, RoleCheck, 60)
		o.Standard = std(30)
		return append(outs, o)
	}
	b.ReportAllocs()
	for b.Loop() {
		b.StopTimer()
		outs := build()
		b.StartTimer()
		if res := evaluate(p, &Sequence{}, outs, testAt); len(res.Lots) != 1 {
			b.Fatal("no lot")
		}
	}
}

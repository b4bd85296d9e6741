package synth

import (
	"bytes"
	"fmt"
	"math"
)

// SmallPipeline processes Small chromatograms: JSON records only, one main
// component at 4 min, a purity limit. Tests of the drivers (many files,
// crashes, bursts) use the pair to stay fast.
const SmallPipeline = `
pipeline "small-test" {
  revision = 1
}
input { signal_unit = "pA" }
smooth {
  window = 5
  order  = 2
}
baseline {}
detect { min_snr = 5 }
integrate {}
identify {
  component "main" {
    rt     = 4.0
    window = 0.3
    main   = true
  }
}
quantify { method = "area-percent" }
limit "Purity" {
  value = component.main.percent
  min   = 95.0
}
report { formats = ["json"] }
`

// Small is a short chromatogram for driver tests: 400 points at 0.025 min,
// a main peak at 4 min and a smaller one at 6 min on a noisy baseline. Its
// lot line makes every i a different file; the same i always gives the same
// bytes.
func Small(i int) []byte {
	r := &rng{s: uint64(i)*0x9e3779b97f4a7c15 + 11}
	var b bytes.Buffer
	fmt.Fprintf(&b, "# Lot: W-%06d\n# Sample type: sample\ntime (min),signal (pA)\n", i)
	for k := range 400 {
		t := float64(k) * 0.025
		y := 5 + 0.2*r.normal() + 100*math.Exp(-0.5*math.Pow((t-4)/0.05, 2)) + float64(1+i%7)*math.Exp(-0.5*math.Pow((t-6)/0.05, 2))
		fmt.Fprintf(&b, "%.3f,%.4f\n", t, y)
	}
	return b.Bytes()
}

// Package synth makes the demo chromatograms of the invented scenario
// (Okkerby Solvents, Tarnmouth works, refined toluene TR-99.8): EMG peaks on a
// drifting baseline with white noise from a fixed seed, so every run of the
// generator writes the same bytes.
package synth

import (
	"fmt"
	"math"
	"strconv"
	"strings"

	"lotgate/steps/dsp"
)

// peak is one synthetic component: an exponentially modified Gaussian of the
// given area (pA·s), centre (min), Gaussian SD (min) and tail constant (min).
type peak struct {
	area, mu, sigma, tau float64
}

// Truth is a peak as generated, for accuracy tests.
type Truth struct {
	// Area in pA·s; Mu, Sigma and Tau of the EMG in min.
	Area, Mu, Sigma, Tau float64
}

// Truth returns the peaks the chromatogram was made from.
func (c Chromatogram) Truth() []Truth {
	out := make([]Truth, len(c.peaks))
	for i, p := range c.peaks {
		out[i] = Truth{p.area, p.mu, p.sigma, p.tau}
	}
	return out
}

// Chromatogram describes one synthetic run of the demo scenario.
type Chromatogram struct {
	File  string
	Meta  [][2]string
	Seed  uint64
	peaks []peak
}

// Sampling of every demo run: 30 min at 20 Hz.
const (
	rateHz  = 20
	minutes = 30
	// NoiseSD is the SD of the white detector noise, in pA.
	NoiseSD = 0.05
)

// baseline is the drifting FID background in pA: a settling term after the
// injection and rising column bleed under the temperature programme.
func baseline(tmin float64) float64 {
	return 3.0 + 1.2*math.Exp(-tmin/2.5) + 0.9*(tmin/minutes)*(tmin/minutes) + 0.15*math.Sin(tmin/4.0)
}

// rng is a small deterministic generator (splitmix64 with Box–Muller), kept
// here so the demo files never change with a Go release.
type rng struct{ s uint64 }

func (r *rng) next() uint64 {
	r.s += 0x9e3779b97f4a7c15
	z := r.s
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

func (r *rng) uniform() float64 { return (float64(r.next()>>11) + 0.5) / (1 << 53) }

func (r *rng) normal() float64 {
	return math.Sqrt(-2*math.Log(r.uniform())) * math.Cos(2*math.Pi*r.uniform())
}

// Render writes the chromatogram as lotgate's delimited text: metadata lines,
// a header with units, then time in seconds and signal in pA.
func (c Chromatogram) Render() []byte {
	var b strings.Builder
	for _, kv := range c.Meta {
		fmt.Fprintf(&b, "# %s: %s\n", kv[0], kv[1])
	}
	b.WriteString("time (s),signal (pA)\n")
	r := &rng{s: c.Seed}
	n := rateHz*minutes*60 + 1
	buf := make([]byte, 0, 32)
	for i := range n {
		ts := float64(i) / rateHz
		tm := ts / 60
		y := baseline(tm) + NoiseSD*r.normal()
		for _, p := range c.peaks {
			if math.Abs(tm-p.mu) < 12*p.sigma+40*p.tau {
				y += dsp.EMG(tm, p.area/60, p.mu, p.sigma, p.tau) // area/60: pA·s → pA·min
			}
		}
		buf = strconv.AppendFloat(buf[:0], ts, 'f', 2, 64)
		buf = append(buf, ',')
		buf = strconv.AppendFloat(buf, y, 'f', 4, 64)
		buf = append(buf, '\n')
		b.Write(buf)
	}
	return []byte(b.String())
}

// The invented scenario: Okkerby Solvents, Tarnmouth works, releases refined
// toluene of grade TR-99.8 (product code OKS-T998). Areas are in pA·s; the
// main peak carries about 99.9 % of the area.
func common(lot, sample, kind, when, water string) [][2]string {
	return [][2]string{
		{"Site", "Okkerby Solvents, Tarnmouth works, QC laboratory"},
		{"Product", "Refined toluene TR-99.8 (OKS-T998)"},
		{"Lot", lot},
		{"Sample ID", sample},
		{"Sample type", kind},
		{"Injection time", when},
		{"Instrument", "GC-FID line 2 (TW-GC-02)"},
		{"Operator", "R. Ashdown"},
		{"Water KF pct", water},
	}
}

func mainAndSolvent(area float64) []peak {
	return []peak{
		{area: 900, mu: 1.10, sigma: 0.010, tau: 0.004},  // unretained (air) peak
		{area: area, mu: 6.40, sigma: 0.018, tau: 0.016}, // toluene, main component
	}
}

// Demo returns the demo runs: a passing lot, a lot with ethylbenzene over its
// limit, and a blank.
func Demo() []Chromatogram {
	const mainArea = 2.0e5
	imp := func(pct, mu, sigma float64) peak {
		return peak{area: mainArea * pct / 100, mu: mu, sigma: sigma, tau: sigma * 0.3}
	}
	pass := append(mainAndSolvent(mainArea),
		imp(0.0060, 3.62, 0.012),  // benzene
		imp(0.0080, 4.21, 0.013),  // unknown (an aliphatic)
		imp(0.0150, 5.08, 0.015),  // unknown
		imp(0.0060, 7.92, 0.019),  // unknown
		imp(0.0210, 9.10, 0.020),  // ethylbenzene
		imp(0.0120, 9.48, 0.021),  // p-xylene
		imp(0.0180, 9.70, 0.021),  // m-xylene
		imp(0.0090, 10.42, 0.022), // o-xylene
		imp(0.0030, 12.80, 0.024), // unknown below the reporting threshold
	)
	fail := append(mainAndSolvent(mainArea),
		imp(0.0070, 3.62, 0.012),
		imp(0.0110, 4.21, 0.013),
		imp(0.0210, 5.08, 0.015),
		imp(0.0740, 9.10, 0.020), // ethylbenzene over its 0.050 % limit
		imp(0.0140, 9.48, 0.021),
		imp(0.0200, 9.70, 0.021),
		imp(0.0100, 10.42, 0.022),
	)
	blank := []peak{{area: 850, mu: 1.10, sigma: 0.010, tau: 0.004}}
	return []Chromatogram{
		{File: "T998-26-1141.csv", Seed: 1141, peaks: pass,
			Meta: common("T998-26-1141", "T998-26-1141-A", "sample", "2026-11-30T22:14:00Z", "0.012")},
		{File: "T998-26-1142.csv", Seed: 1142, peaks: fail,
			Meta: common("T998-26-1142", "T998-26-1142-A", "sample", "2026-11-30T22:52:00Z", "0.018")},
		{File: "blank-26-1141.csv", Seed: 7, peaks: blank,
			Meta: common("-", "BLANK-2611-30", "blank", "2026-11-30T21:36:00Z", "-")},
	}
}

package synth

import (
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"lotgate/steps/dsp"
)

// File is one generated file: its name and bytes.
type File struct {
	Name string
	Data []byte
}

// Sequence is a generated sequence: the sequence file and its data files.
type Sequence struct {
	// Name is a short name for the sequence's folder.
	Name string
	// Lot is the lot its samples come from.
	Lot string
	// SequenceFile names the sequence file among Files.
	SequenceFile string
	// Files holds the sequence file first, then the data files in run order.
	Files []File
}

// seqComponent is a component of the sequence runs: retention, Gaussian SD
// (min) and relative response factor.
type seqComponent struct {
	name      string
	mu, sigma float64
	rrf       float64
}

// The components of the night runs, as the demo method identifies them.
var seqComponents = []seqComponent{
	{"benzene", 3.62, 0.012, 1.01},
	{"ethylbenzene", 9.10, 0.020, 0.98},
	{"p-xylene", 9.48, 0.021, 0.97},
	{"m-xylene", 9.70, 0.021, 0.97},
	{"o-xylene", 10.42, 0.022, 0.97},
}

// seqUnknowns are the unidentified impurities of the product: retention
// and Gaussian SD (min).
var seqUnknowns = [][2]float64{{4.21, 0.013}, {5.08, 0.015}, {7.92, 0.019}, {12.80, 0.024}}

// mainArea is the toluene peak's area (pA·s); one mg/kg of a component
// with relative response factor 1 gives mainArea/10⁶ pA·s.
const mainArea = 2.0e5

// sample is the content of a sample in mg/kg: the named components in the
// order of seqComponents, then the unknowns in the order of seqUnknowns.
type sample struct {
	id       string
	named    [5]float64
	unknowns [4]float64
	waterPct string
}

// runItem is one injection of a sequence plan.
type runItem struct {
	role     string
	standard int // 1-based calibration level, 0 for none
	sample   *sample
	rep      int
	// factor multiplies every area: the injection's volume repeatability,
	// and the detector drift of the drifting sequence.
	factor float64
}

// plan describes a sequence to generate.
type plan struct {
	name, lot, prefix, title string
	rateHz, minutes          int
	items                    []runItem
	start                    time.Time
}

// Standard levels: benzene 20…100 mg/kg and ethylbenzene 100…500 mg/kg in
// five levels; each xylene at 100 mg/kg in every standard, so that the
// suitability injections show the p-/m-xylene pair.
func standardAmounts(level int) [5]float64 {
	return [5]float64{20 * float64(level), 100 * float64(level), 100, 100, 100}
}

// suitabilityLevel is the standard injected for system suitability and as
// the bracketing check.
const suitabilityLevel = 3

// NightSequences returns the demo's two night sequences, 15 min runs at
// 10 Hz: lot T998-26-1150, which is released, and lot T998-26-1151, whose
// closing check standard responds 9 % low, so that its run is invalid.
// Each holds a blank, a five-level calibration, five suitability
// injections, two samples in three replicates and a closing check
// standard. The bytes depend on nothing but this code.
func NightSequences() []Sequence {
	released := nightPlan("night-released", "T998-26-1150", "n1150", 1150,
		sample{id: "T998-26-1150-A", named: [5]float64{60, 210, 120, 180, 90}, unknowns: [4]float64{80, 150, 60, 30}, waterPct: "0.012"},
		sample{id: "T998-26-1150-B", named: [5]float64{57, 205, 118, 176, 92}, unknowns: [4]float64{78, 146, 62, 28}, waterPct: "0.013"},
		1.0)
	drifting := nightPlan("night-drift", "T998-26-1151", "n1151", 1151,
		sample{id: "T998-26-1151-A", named: [5]float64{64, 220, 122, 183, 95}, unknowns: [4]float64{82, 152, 58, 31}, waterPct: "0.015"},
		sample{id: "T998-26-1151-B", named: [5]float64{62, 224, 119, 185, 93}, unknowns: [4]float64{84, 149, 61, 29}, waterPct: "0.014"},
		0.91)
	return []Sequence{released.render(), drifting.render()}
}

// nightPlan lays out a night sequence: blank, five calibration levels, five
// suitability injections, samples a and b in three replicates, and the
// closing check standard, whose response is scaled by closing.
func nightPlan(name, lot, prefix string, seed uint64, a, b sample, closing float64) plan {
	p := plan{name: name, lot: lot, prefix: prefix, rateHz: 10, minutes: 15,
		title: "Night sequence for lot " + lot + " on GC-FID line 2 (TW-GC-02)",
		start: time.Date(2026, 12, 1, 21, 0, 0, 0, time.UTC)}
	r := &rng{s: seed}
	add := func(it runItem) {
		it.factor = 1 + 0.004*r.normal() // injection repeatability, 0.4 % RSD
		p.items = append(p.items, it)
	}
	add(runItem{role: "blank"})
	for lv := 1; lv <= 5; lv++ {
		add(runItem{role: "calibration", standard: lv})
	}
	for range 5 {
		add(runItem{role: "suitability", standard: suitabilityLevel})
	}
	for _, s := range []*sample{&a, &b} {
		for rep := 1; rep <= 3; rep++ {
			add(runItem{role: "sample", sample: s, rep: rep})
		}
	}
	add(runItem{role: "check", standard: suitabilityLevel})
	p.items[len(p.items)-1].factor *= closing
	return p
}

// BenchmarkSequence returns a sequence of n injections (at least 12) of
// 30 min runs at 20 Hz (36,001 points), for timing whole sequences: a
// blank, the five calibration levels, five suitability injections, then
// samples in three replicates with a check standard after every second
// sample, and a final check.
func BenchmarkSequence(n int) Sequence {
	n = max(n, 12)
	p := plan{name: "bench", lot: "T998-26-2000", prefix: "b2000", rateHz: 20, minutes: 30,
		title: "Benchmark sequence", start: time.Date(2026, 12, 2, 18, 0, 0, 0, time.UTC)}
	r := &rng{s: 2000}
	add := func(it runItem) {
		it.factor = 1 + 0.004*r.normal()
		p.items = append(p.items, it)
	}
	add(runItem{role: "blank"})
	for lv := 1; lv <= 5; lv++ {
		add(runItem{role: "calibration", standard: lv})
	}
	for range 5 {
		add(runItem{role: "suitability", standard: suitabilityLevel})
	}
	var samples []*sample
	since := 0
	for k := 0; len(p.items) < n-1; k++ {
		s := &sample{id: fmt.Sprintf("T998-26-2000-%02d", k/3+1), named: [5]float64{60, 210, 120, 180, 90},
			unknowns: [4]float64{80, 150, 60, 30}, waterPct: "0.012"}
		if k%3 == 0 {
			samples = append(samples, s)
		}
		s = samples[len(samples)-1]
		add(runItem{role: "sample", sample: s, rep: k%3 + 1})
		if since++; since == 6 && len(p.items) < n-1 {
			add(runItem{role: "check", standard: suitabilityLevel})
			since = 0
		}
	}
	add(runItem{role: "check", standard: suitabilityLevel})
	return p.render()
}

// fileName names an injection's data file.
func (p plan) fileName(i int, it runItem) string {
	kind := it.role
	switch it.role {
	case "calibration":
		kind = "cal" + strconv.Itoa(it.standard)
	case "suitability":
		kind = "sst"
	case "sample":
		kind = it.sample.id[strings.LastIndexByte(it.sample.id, '-')+1:] + "-" + strconv.Itoa(it.rep)
	}
	return fmt.Sprintf("%s-%02d-%s.csv", p.prefix, i+1, kind)
}

// render generates the sequence file and every data file.
func (p plan) render() Sequence {
	seq := Sequence{Name: p.name, Lot: p.lot, SequenceFile: p.prefix + ".sequence.hcl"}
	seq.Files = append(seq.Files, File{Name: seq.SequenceFile, Data: p.sequenceText()})
	for i, it := range p.items {
		seq.Files = append(seq.Files, File{Name: p.fileName(i, it), Data: p.injection(i, it)})
	}
	return seq
}

// sequenceText writes the sequence file.
func (p plan) sequenceText() []byte {
	var b strings.Builder
	fmt.Fprintf(&b, "# %s.\n# Invented scenario (Okkerby Solvents, Tarnmouth works), generated by lotgate.\n\n", p.title)
	fmt.Fprintf(&b, "sequence %q {\n  lot         = %q\n  description = %q\n  unit        = \"mg/kg\"\n}\n", p.prefix, p.lot, p.title)
	for lv := 1; lv <= 5; lv++ {
		am := standardAmounts(lv)
		fmt.Fprintf(&b, "\nstandard \"CAL-%d\" {\n  level   = %d\n  amounts = {\n", lv, lv)
		for k, c := range seqComponents {
			fmt.Fprintf(&b, "    %-12s = %s\n", c.name, strconv.FormatFloat(am[k], 'f', -1, 64))
		}
		b.WriteString("  }\n}\n")
	}
	for i, it := range p.items {
		fmt.Fprintf(&b, "\ninjection \"%02d\" {\n  file = %q\n  role = %q\n", i+1, p.fileName(i, it), it.role)
		if it.standard > 0 {
			fmt.Fprintf(&b, "  standard = \"CAL-%d\"\n", it.standard)
		}
		if it.sample != nil {
			fmt.Fprintf(&b, "  sample    = %q\n  replicate = %d\n", it.sample.id, it.rep)
		}
		b.WriteString("}\n")
	}
	return []byte(b.String())
}

// injection renders one injection's data file: metadata lines, a header,
// then time (s) and signal (pA), EMG peaks on the drifting baseline with
// white noise from a seed of its own.
func (p plan) injection(i int, it runItem) []byte {
	var pk []peak
	pk = append(pk, peak{area: 900, mu: 1.10, sigma: 0.010, tau: 0.004}) // unretained (air) peak
	var amounts [5]float64
	var unknowns [4]float64
	kind, lot, id, water := "standard", "-", "", "-"
	switch {
	case it.role == "blank":
		kind, id = "blank", "BLANK-"+p.prefix
	case it.sample != nil:
		kind, lot, id, water = "sample", p.lot, it.sample.id, it.sample.waterPct
		amounts, unknowns = it.sample.named, it.sample.unknowns
	default:
		id = "CAL-" + strconv.Itoa(it.standard)
		amounts = standardAmounts(it.standard)
	}
	if it.role != "blank" {
		pk = append(pk, peak{area: mainArea * it.factor, mu: 6.40, sigma: 0.018, tau: 0.016})
	}
	for k, c := range seqComponents {
		if amounts[k] > 0 {
			area := mainArea / 1e6 * c.rrf * amounts[k] * it.factor
			pk = append(pk, peak{area: area, mu: c.mu, sigma: c.sigma, tau: 0.3 * c.sigma})
		}
	}
	for k, u := range seqUnknowns {
		if unknowns[k] > 0 {
			pk = append(pk, peak{area: mainArea / 1e6 * unknowns[k] * it.factor, mu: u[0], sigma: u[1], tau: 0.3 * u[1]})
		}
	}
	at := p.start.Add(time.Duration(i) * 18 * time.Minute)
	meta := [][2]string{
		{"Site", "Okkerby Solvents, Tarnmouth works, QC laboratory"},
		{"Product", "Refined toluene TR-99.8 (OKS-T998)"},
		{"Lot", lot},
		{"Sample ID", id},
		{"Sample type", kind},
		{"Injection time", at.Format(time.RFC3339)},
		{"Instrument", "GC-FID line 2 (TW-GC-02)"},
		{"Operator", "R. Ashdown"},
		{"Water KF pct", water},
	}
	c := Chromatogram{File: p.fileName(i, it), Meta: meta, Seed: uint64(p.start.Unix()) + uint64(i)*7919, peaks: pk}
	return c.renderAt(p.rateHz, p.minutes)
}

// renderAt writes the chromatogram as Render does, sampled at rateHz for
// the given minutes.
func (c Chromatogram) renderAt(rateHz, minutes int) []byte {
	var b strings.Builder
	for _, kv := range c.Meta {
		fmt.Fprintf(&b, "# %s: %s\n", kv[0], kv[1])
	}
	b.WriteString("time (s),signal (pA)\n")
	r := &rng{s: c.Seed}
	n := rateHz*minutes*60 + 1
	b.Grow(n * 16)
	buf := make([]byte, 0, 32)
	for i := range n {
		ts := float64(i) / float64(rateHz)
		tm := ts / 60
		y := baseline(tm) + NoiseSD*r.normal()
		for _, pk := range c.peaks {
			if math.Abs(tm-pk.mu) < 12*pk.sigma+40*pk.tau {
				y += dsp.EMG(tm, pk.area/60, pk.mu, pk.sigma, pk.tau) // area/60: pA·s → pA·min
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

package reports

import (
	"math"
	"math/rand/v2"
	"slices"
	"strings"
	"testing"

	"gonum.org/v1/plot/vg"
	"gonum.org/v1/plot/vg/draw"
	"gonum.org/v1/plot/vg/vgimg"
)

// checkColumns checks minMaxColumns(y, columns) against a brute-force scan:
// indices strictly increasing, at most two per pixel column, and each
// column's smallest and largest finite values among the kept samples (common
// practice: min–max decimation draws the same pixels as the full line).
func checkColumns(t *testing.T, y []float64, columns int) []int {
	t.Helper()
	got := minMaxColumns(y, columns)
	if !slices.IsSorted(got) || len(slices.Compact(slices.Clone(got))) != len(got) {
		t.Fatalf("indices are not strictly increasing: %v…", got[:min(len(got), 20)])
	}
	finite := func(v float64) bool { return !math.IsNaN(v) && !math.IsInf(v, 0) }
	if len(y) <= 2*columns {
		var want []int
		for i, v := range y {
			if finite(v) {
				want = append(want, i)
			}
		}
		if !slices.Equal(got, want) {
			t.Errorf("short input: kept %v, want every finite sample %v", got, want)
		}
		return got
	}
	k := 0
	for c := range columns {
		lo, hi := c*len(y)/columns, (c+1)*len(y)/columns
		wantMin, wantMax := math.Inf(1), math.Inf(-1)
		for _, v := range y[lo:hi] {
			if finite(v) {
				wantMin, wantMax = min(wantMin, v), max(wantMax, v)
			}
		}
		gotMin, gotMax, n := math.Inf(1), math.Inf(-1), 0
		for ; k < len(got) && got[k] < hi; k++ {
			gotMin, gotMax, n = min(gotMin, y[got[k]]), max(gotMax, y[got[k]]), n+1
		}
		if n > 2 || gotMin != wantMin || gotMax != wantMax {
			t.Fatalf("column %d [%d, %d): kept %d samples spanning %g…%g, want ≤ 2 spanning %g…%g",
				c, lo, hi, n, gotMin, gotMax, wantMin, wantMax)
		}
	}
	return got
}

func TestMinMaxColumnsSpike(t *testing.T) {
	// A peak one sample wide in a million-point trace survives decimation to
	// a page's 2,126 pixel columns (180 mm at 300 dpi), and so does a dip.
	y := make([]float64, 1_000_000)
	for i := range y {
		y[i] = 1e-3 * math.Sin(float64(i)*0.37)
	}
	const spike, dip = 654_321, 123_457
	y[spike], y[dip] = 5, -5
	got := checkColumns(t, y, 2126)
	if !slices.Contains(got, spike) || !slices.Contains(got, dip) {
		t.Errorf("the one-sample spike (%v) or dip (%v) was lost", slices.Contains(got, spike), slices.Contains(got, dip))
	}
	if len(got) > 2*2126 {
		t.Errorf("kept %d samples, more than two per column", len(got))
	}
}

func TestMinMaxColumns(t *testing.T) {
	rng := rand.New(rand.NewPCG(1, 2))
	random := make([]float64, 10_007)
	for i := range random {
		random[i] = rng.NormFloat64()
	}
	gaps := slices.Clone(random)
	for i := 0; i < len(gaps); i += 7 {
		gaps[i] = math.NaN()
	}
	gaps[100], gaps[5000] = math.Inf(1), math.Inf(-1)
	cases := []struct {
		name    string
		y       []float64
		columns int
	}{
		{"empty", nil, 10},
		{"shorter than two per column", []float64{3, 1, 2}, 10},
		{"exactly two per column", []float64{1, 5, 2, 4}, 2},
		{"non-finite in a short trace", []float64{1, math.NaN(), math.Inf(1), 2}, 4},
		{"random", random, 97},
		{"random, one column", random, 1},
		{"random, columns of one or two samples", random, 5_000},
		{"non-finite samples", gaps, 333},
		{"all NaN", []float64{math.NaN(), math.NaN(), math.NaN(), math.NaN(), math.NaN()}, 2},
		{"no columns asked", random, 0},
		{"constant", slices.Repeat([]float64{7}, 1000), 10},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) { checkColumns(t, c.y, max(c.columns, 1)) })
	}
}

func TestNiceTicks(t *testing.T) {
	// Steps of 1, 2 or 5 × 10ⁿ giving about six labelled ticks (common
	// practice for axis labels).
	cases := []struct {
		lo, hi float64
		want   []string
	}{
		{0, 30, []string{"0", "5", "10", "15", "20", "25", "30"}},
		{0, 30.000000000000004, []string{"0", "5", "10", "15", "20", "25", "30"}},
		{2.4, 11.7, []string{"4", "6", "8", "10"}},
		{2.9, 7.6, []string{"3", "4", "5", "6", "7"}},
		{0, 0.06, []string{"0.00", "0.01", "0.02", "0.03", "0.04", "0.05", "0.06"}},
		{0.1, 0.5, []string{"0.1", "0.2", "0.3", "0.4", "0.5"}},
		{-1, 1, []string{"-1.0", "-0.5", "0.0", "0.5", "1.0"}},
		{-3.2, 62_000, []string{"0", "20000", "40000", "60000"}},
		{5, 5, nil},
	}
	for _, c := range cases {
		var got []string
		ticks := niceTicks{}.Ticks(c.lo, c.hi)
		for _, tk := range ticks {
			if tk.Value < c.lo || tk.Value > c.hi {
				t.Errorf("Ticks(%g, %g): tick %g outside the range", c.lo, c.hi, tk.Value)
			}
			if tk.Label != "" {
				got = append(got, tk.Label)
			}
		}
		if !slices.Equal(got, c.want) {
			t.Errorf("Ticks(%g, %g) labels %q, want %q", c.lo, c.hi, got, c.want)
		}
		if len(c.want) > 0 && len(ticks) < 2*len(c.want)-1 {
			t.Errorf("Ticks(%g, %g): no minor ticks between the labelled ones", c.lo, c.hi)
		}
	}
}

func TestFigurePanels(t *testing.T) {
	rec, _ := demoRecord(t, "T998-26-1141.csv")
	panels := figurePanels(rec)
	if len(panels) != 2 {
		t.Fatalf("%d panels for a 99.9 %% main peak, want a full-scale and an expanded one", len(panels))
	}
	full, zoom := panels[0], panels[1]
	main := mainPeak(rec)
	if rec.Peaks[main].Component != "toluene" {
		t.Fatalf("main peak is %q, want the component marked main (toluene)", rec.Peaks[main].Name)
	}
	tr := rec.Trace
	at := func(i int) float64 { return tr.StartMin + float64(i)*tr.IntervalMin }
	tallest := 0.0
	for i, p := range rec.Peaks {
		if at(zoom.from) > p.RTMin || at(zoom.to-1) < p.RTMin {
			t.Errorf("peak %d at %.3f min is outside the expanded panel (%.3f–%.3f min)", p.Number, p.RTMin,
				at(zoom.from), at(zoom.to-1))
		}
		if i != main {
			tallest = max(tallest, p.Height)
		}
	}
	// The impurities fill most of the expanded panel; the main peak is off
	// its scale and fits the full-scale one.
	if span := zoom.ymax - zoom.ymin; span < tallest || span > 2*tallest {
		t.Errorf("expanded panel spans %g pA; want between 1 and 2 × the tallest impurity (%g pA)", span, tallest)
	}
	apex := rec.Trace.Processed[int(math.Round((rec.Peaks[main].RTMin-tr.StartMin)/tr.IntervalMin))]
	if apex <= zoom.ymax || apex > full.ymax || full.ymin > 0 {
		t.Errorf("main apex %g pA: want above the expanded panel (%g) and within the full one (%g–%g)",
			apex, zoom.ymax, full.ymin, full.ymax)
	}
	names := map[string]bool{}
	for _, l := range zoom.labels {
		names[l.text] = l.named
	}
	for _, want := range []string{"benzene", "ethylbenzene", "p-xylene", "m-xylene", "o-xylene"} {
		if !names[want] {
			t.Errorf("the expanded panel does not name %s", want)
		}
	}

	blank, _ := demoRecord(t, "blank-26-1141.csv")
	bp := figurePanels(blank)
	b0, b1 := finiteRange(blank.Trace.Baseline, 0, len(blank.Trace.Baseline))
	if len(bp) != 2 || bp[1].from != 0 || bp[1].to != len(blank.Trace.Processed) ||
		bp[1].ymin > b0 || bp[1].ymax-b1 != 25*blank.Noise.PeakToPeak {
		t.Errorf("a blank gets a full-scale panel and a whole-run one reaching 25 × the noise over the baseline; got %+v", bp)
	}
	one := synthRecord(1)
	one.Noise = nil
	if got := figurePanels(one); len(got) != 1 {
		t.Errorf("one peak and no noise estimate: %d panels, want the full-scale one only", len(got))
	}
	none := synthRecord(3)
	none.Trace = nil
	if got := figurePanels(none); len(got) != 0 {
		t.Errorf("no trace: %d panels, want none", len(got))
	}
}

func TestPanelKeepsItsPlotArea(t *testing.T) {
	// A very long component name is cut short in the figure, so that the
	// labels never squeeze the plot's data area.
	rec := synthRecord(12)
	long := strings.Repeat("VeryLongComponentName", 10)
	rec.Peaks[3].Name, rec.Peaks[3].Component = long, long
	const w, h = 178.0, 50.0
	for i, spec := range figurePanels(rec) {
		p := panelPlot(rec, spec, w)
		c := draw.New(vgimg.New(vg.Length(w/mmPerPoint), vg.Length(h/mmPerPoint)))
		area := p.DataCanvas(c)
		if got := float64(area.Max.Y-area.Min.Y) * mmPerPoint; got < 0.4*h {
			t.Errorf("panel %d: the data area is %.1f mm high of %.0f", i, got, h)
		}
		if len(spec.labels) == 0 {
			t.Fatalf("panel %d has no labels", i)
		}
		for _, l := range spec.labels {
			if n := len([]rune(l.text)); n > maxLabel {
				t.Errorf("panel %d: label of %d characters", i, n)
			}
		}
	}
}

func TestShortLabel(t *testing.T) {
	cases := []struct{ in, want string }{
		{"toluene", "toluene"},
		{"exactly eighteen c", "exactly eighteen c"},
		{"nineteen characters", "nineteen characte…"},
		{"µµµµµµµµµµµµµµµµµµµµ", "µµµµµµµµµµµµµµµµµ…"},
	}
	for _, c := range cases {
		if got := shortLabel(c.in); got != c.want {
			t.Errorf("shortLabel(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}

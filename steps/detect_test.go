package steps

import (
	"context"
	"errors"
	"math"
	"reflect"
	"strings"
	"testing"

	"lotgate/steps/dsp"
)

// pkRand is a tiny deterministic generator (splitmix64) for synthetic noise
// in the peak tests.
type pkRand struct{ s uint64 }

func (r *pkRand) next() uint64 {
	r.s += 0x9e3779b97f4a7c15
	z := r.s
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// normal returns a standard normal deviate by the Box–Muller transform.
func (r *pkRand) normal() float64 {
	u1 := (float64(r.next()>>11) + 0.5) / (1 << 53) // in (0, 1)
	u2 := float64(r.next()>>11) / (1 << 53)
	return math.Sqrt(-2*math.Log(u1)) * math.Cos(2*math.Pi*u2)
}

// pkShape is a synthetic exponentially modified Gaussian peak: apex height
// (signal units) and Gaussian mean, SD and time constant (min).
type pkShape struct{ height, mu, sigma, tau float64 }

// area returns the peak's area in signal·min: the EMG of unit area is
// scanned finely for its maximum and scaled to the height.
func (p pkShape) area() float64 {
	top := 0.0
	step := p.sigma / 2000
	for x := p.mu - p.sigma; x < p.mu+p.tau+2*p.sigma; x += step {
		top = max(top, dsp.EMG(x, 1, p.mu, p.sigma, p.tau))
	}
	return p.height / top
}

// apexTime returns the time of the peak's maximum, to σ/2000.
func (p pkShape) apexTime() float64 {
	best, at := 0.0, p.mu
	step := p.sigma / 2000
	for x := p.mu - p.sigma; x < p.mu+p.tau+2*p.sigma; x += step {
		if v := dsp.EMG(x, 1, p.mu, p.sigma, p.tau); v > best {
			best, at = v, x
		}
	}
	return at
}

// pkRun builds a run of minutes·60·hz samples from time 0: the peaks, plus
// drift(t) when drift is not nil, plus normal noise of SD sd.
func pkRun(minutes, hz float64, peaks []pkShape, drift func(float64) float64, sd float64, seed uint64) *Run {
	n := int(minutes * 60 * hz)
	dt := 1 / (60 * hz)
	tm := make([]float64, n)
	sig := make([]float64, n)
	rng := pkRand{seed}
	for i := range tm {
		tm[i] = float64(i) * dt
		if drift != nil {
			sig[i] = drift(tm[i])
		}
		sig[i] += sd * rng.normal()
	}
	for _, p := range peaks {
		a := p.area()
		lo := max(0, int((p.mu-8*p.sigma)/dt))
		hi := min(n, int((p.mu+8*p.sigma+40*p.tau)/dt)+1)
		for i := lo; i < hi; i++ {
			sig[i] += dsp.EMG(tm[i], a, p.mu, p.sigma, p.tau)
		}
	}
	return NewRun(Trace{Time: tm, Signal: sig, SignalUnit: "pA"}, nil)
}

// pkDetect runs detect on r as a pipeline would, recording it as done.
func pkDetect(t testing.TB, d *Detect, r *Run) {
	t.Helper()
	if err := d.Run(context.Background(), r); err != nil {
		t.Fatalf("detect: %v", err)
	}
	r.Done = append(r.Done, d.Name())
}

// pkAnalyse runs detect and integrate on r.
func pkAnalyse(t testing.TB, d *Detect, s *Integrate, r *Run) {
	t.Helper()
	pkDetect(t, d, r)
	if err := s.Run(context.Background(), r); err != nil {
		t.Fatalf("integrate: %v", err)
	}
	r.Done = append(r.Done, s.Name())
}

// pkMatch returns the index of the peak whose RT is nearest to rt within tol
// min, or −1.
func pkMatch(peaks []Peak, rt, tol float64) int {
	k := -1
	for i, p := range peaks {
		if d := math.Abs(p.RT - rt); d <= tol && (k < 0 || d < math.Abs(peaks[k].RT-rt)) {
			k = i
		}
	}
	return k
}

// pkCheckPeaks fails on peaks out of order, overlapping, with bad indices or
// with a figure that is NaN or infinite.
func pkCheckPeaks(t testing.TB, r *Run) {
	t.Helper()
	n := len(r.Processed)
	for i, p := range r.Peaks {
		if p.Start < 0 || p.Start >= p.Apex || p.Apex >= p.End || p.End >= n {
			t.Fatalf("peak %d: bad samples %d/%d/%d of %d", i, p.Start, p.Apex, p.End, n)
		}
		if i > 0 && p.Start < r.Peaks[i-1].End {
			t.Fatalf("peak %d starts at %d before peak %d ends at %d", i, p.Start, i-1, r.Peaks[i-1].End)
		}
		for _, v := range []float64{p.RT, p.Height, p.Area, p.WidthHalf, p.Width5, p.Tailing, p.Plates, p.SNR, p.Resolution} {
			if math.IsNaN(v) || math.IsInf(v, 0) {
				t.Fatalf("peak %d has a non-finite figure: %+v", i, p)
			}
		}
	}
}

func TestDetectFindsPeaksAboveSNR10(t *testing.T) {
	// check-values.md §3: S/N = 2H/h, and a peak at the quantitation limit
	// has S/N = 10 (system sensitivity). Every synthetic peak here is made
	// with S/N ≥ 10 against noise of SD 1 (h ≈ 6.5, common practice), and
	// all must be found once each, with nothing else, at min_snr = 3.
	shapes := []pkShape{
		{5000, 2.0, 0.015, 0.005},
		{60, 3.5, 0.015, 0.010},
		{800, 5.0, 0.020, 0.020},
		{45, 7.2, 0.020, 0.010},
		{20000, 9.0, 0.025, 0.040}, // a tailing main peak ...
		{60, 9.4, 0.020, 0.010},    // ... with a small one on its tail
		{300, 12.0, 0.030, 0.030},
		{40, 15.5, 0.030, 0.060},
		{1500, 20.0, 0.035, 0.020},
		{100, 24.0, 0.040, 0.080},
		{38, 27.5, 0.040, 0.030},
	}
	for seed := uint64(1); seed <= 3; seed++ {
		r := pkRun(30, 20, shapes, nil, 1, seed)
		pkAnalyse(t, &Detect{MinSNR: 3}, &Integrate{}, r)
		pkCheckPeaks(t, r)
		// Most noise blocks touch a peak here (several sit on block edges);
		// the noise must still be that of the baseline: SD 1, range about
		// 6.5 SD over 1 min at 20 Hz (common practice).
		h := r.Noise.PeakToPeak
		if math.Abs(r.Noise.SD-1) > 0.05 || h < 5.5 || h > 7.5 {
			t.Errorf("seed %d: noise SD %g and range %g, want 1 ± 5 %% and about 6.5", seed, r.Noise.SD, h)
		}
		for _, p := range shapes {
			if dsp.SignalToNoise(p.height, h) < 10 {
				t.Fatalf("seed %d: test peak at %g min has S/N %.1f < 10 (h = %g); the test is miscalibrated", seed, p.mu, dsp.SignalToNoise(p.height, h), h)
			}
			if pkMatch(r.Peaks, p.apexTime(), p.sigma) < 0 {
				t.Errorf("seed %d: the peak at %.4f min (S/N %.0f) was not found", seed, p.apexTime(), dsp.SignalToNoise(p.height, h))
			}
		}
		if len(r.Peaks) != len(shapes) {
			var rts []float64
			for _, p := range r.Peaks {
				rts = append(rts, p.RT)
			}
			t.Errorf("seed %d: found %d peaks at %v, want %d", seed, len(r.Peaks), rts, len(shapes))
		}
	}
}

func TestDetectBlank(t *testing.T) {
	// A blank is noise and drift only. The baseline step's estimate follows
	// the drift up to a slow residual error of 1.5 noise SDs; no peak may be
	// reported (the largest of 36,000 normal deviates is about 4.5 SD, well
	// below min_snr 3 × h/2 ≈ 10 SD; common practice).
	drift := func(x float64) float64 { return 30 + 2*x + 15*math.Sin(2*math.Pi*x/17) }
	for seed := uint64(1); seed <= 5; seed++ {
		r := pkRun(30, 20, nil, drift, 1, seed)
		r.Baseline = make([]float64, len(r.Processed))
		for i, x := range r.Trace.Time {
			r.Baseline[i] = drift(x) + 1.5*math.Sin(2*math.Pi*x/5)
		}
		pkDetect(t, &Detect{MinSNR: 3}, r)
		if len(r.Peaks) != 0 {
			t.Errorf("seed %d: %d peaks found on a blank, first at sample %d", seed, len(r.Peaks), r.Peaks[0].Apex)
		}
		// The median block SD estimates the noise SD (common practice).
		if r.Noise.Method != NoiseByBlocks || r.Noise.BlockMin != 1 || math.Abs(r.Noise.SD-1) > 0.05 {
			t.Errorf("seed %d: noise %+v, want blocks of 1 min and SD 1 ± 5 %%", seed, *r.Noise)
		}
	}
}

func TestDetectSplitsOverlap(t *testing.T) {
	// Two Gaussians 4σ apart: resolution 1 by the tangent formula
	// 2Δt/(Wb1 + Wb2) with Wb = 4σ (check-values.md §2, §3). They must be
	// split by a perpendicular drop at the valley, and the two areas must add
	// up to the area of the whole cluster (the drop sample is shared by the
	// two trapezoidal sums) and to the true total within 0.5 %.
	const sigma = 0.03
	shapes := []pkShape{{1000, 10, sigma, 0}, {600, 10 + 4*sigma, sigma, 0}}
	for seed := uint64(1); seed <= 4; seed++ {
		r := pkRun(20, 20, shapes, nil, 1, seed)
		pkAnalyse(t, &Detect{MinSNR: 3}, &Integrate{Constants: ConstantsExact}, r)
		pkCheckPeaks(t, r)
		if len(r.Peaks) != 2 {
			t.Fatalf("seed %d: %d peaks, want 2", seed, len(r.Peaks))
		}
		p, q := r.Peaks[0], r.Peaks[1]
		if !p.EndDrop || !q.StartDrop || p.StartDrop || q.EndDrop || p.End != q.Start {
			t.Fatalf("seed %d: boundaries %+v / %+v, want one shared perpendicular drop", seed, p, q)
		}
		// The drop lies at the valley of the noise-free sum (found on a fine
		// grid) within 0.3σ.
		valley, low := 0.0, math.Inf(1)
		for x := shapes[0].mu; x < shapes[1].mu; x += sigma / 1000 {
			v := dsp.Gaussian(x, 1000, shapes[0].mu, sigma) + dsp.Gaussian(x, 600, shapes[1].mu, sigma)
			if v < low {
				valley, low = x, v
			}
		}
		if got := r.Trace.Time[p.End]; math.Abs(got-valley) > 0.3*sigma {
			t.Errorf("seed %d: drop at %.4f min, valley at %.4f min", seed, got, valley)
		}
		y := r.Corrected()
		var whole float64
		for i := p.Start; i < q.End; i++ {
			whole += (y[i] + y[i+1]) / 2 * (r.Trace.Time[i+1] - r.Trace.Time[i]) * 60
		}
		if math.Abs(p.Area+q.Area-whole) > 1e-9*whole {
			t.Errorf("seed %d: areas %g + %g = %g, want the cluster's %g", seed, p.Area, q.Area, p.Area+q.Area, whole)
		}
		truth := (shapes[0].area() + shapes[1].area()) * 60
		if math.Abs(p.Area+q.Area-truth) > 0.005*truth {
			t.Errorf("seed %d: total area %g, want %g ± 0.5 %%", seed, p.Area+q.Area, truth)
		}
		// Half-height resolution with the exact constant equals the tangent
		// one on Gaussians (§2); overlap narrows the inner half-widths by
		// about 2 % here (derived), so 1 is checked within 0.05.
		if math.Abs(q.Resolution-1) > 0.05 {
			t.Errorf("seed %d: resolution %g, want about 1", seed, q.Resolution)
		}
	}
}

func TestDetectTailingPeakNotSplit(t *testing.T) {
	// A strongly tailing peak (τ/σ = 3 and 5, check-values.md §10 shapes) on
	// noise is one peak, whatever the noise does on its tail.
	for _, tau := range []float64{0.06, 0.1} {
		for seed := uint64(1); seed <= 6; seed++ {
			r := pkRun(12, 20, []pkShape{{2000, 5, 0.02, tau}}, nil, 1, seed)
			pkAnalyse(t, &Detect{MinSNR: 3}, &Integrate{}, r)
			if len(r.Peaks) != 1 {
				var rts []float64
				for _, p := range r.Peaks {
					rts = append(rts, p.RT)
				}
				t.Errorf("tau %g, seed %d: %d peaks at %v, want 1", tau, seed, len(r.Peaks), rts)
			}
		}
	}
}

func TestDetectIgnore(t *testing.T) {
	// An unretained peak at the start is ignored by a window; the windows
	// include both ends (common practice for time windows in a method).
	shapes := []pkShape{{3000, 0.3, 0.01, 0.005}, {500, 5, 0.02, 0.01}}
	r := pkRun(8, 20, shapes, nil, 1, 1)
	pkAnalyse(t, &Detect{MinSNR: 3}, &Integrate{}, r)
	if len(r.Peaks) != 2 {
		t.Fatalf("%d peaks without ignore windows, want 2", len(r.Peaks))
	}
	rt := r.Peaks[1].RT
	for _, tc := range []struct {
		name   string
		ignore []Window
		want   []float64
	}{
		{"start of run", []Window{{0, 0.6}}, []float64{rt}},
		{"window ending at the rt", []Window{{4, rt}}, []float64{r.Peaks[0].RT}},
		{"window starting at the rt", []Window{{rt, 6}}, []float64{r.Peaks[0].RT}},
		{"both", []Window{{0, 0.6}, {rt, rt}}, nil},
		{"elsewhere", []Window{{2, 3}}, []float64{r.Peaks[0].RT, rt}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			r2 := pkRun(8, 20, shapes, nil, 1, 1)
			pkAnalyse(t, &Detect{MinSNR: 3, Ignore: tc.ignore}, &Integrate{}, r2)
			var got []float64
			for _, p := range r2.Peaks {
				got = append(got, p.RT)
			}
			if !reflect.DeepEqual(got, tc.want) {
				t.Errorf("peaks at %v, want %v", got, tc.want)
			}
		})
	}
}

func TestDetectFilters(t *testing.T) {
	// A narrow tall peak, a wide low one and a medium one. Their figures
	// follow from §2: wh = 2.3548σ and area = 2.5066·H·σ (× 60 for
	// signal·s): narrow 0.0235 min, 752; wide 0.188 min, 602; medium
	// 0.071 min, 903.
	shapes := []pkShape{{500, 3, 0.01, 0}, {50, 8, 0.08, 0}, {200, 13, 0.03, 0}}
	for _, tc := range []struct {
		name string
		d    Detect
		want []float64 // apex times kept
	}{
		{"no filter", Detect{MinSNR: 3}, []float64{3, 8, 13}},
		{"min width", Detect{MinSNR: 3, MinWidth: 0.1}, []float64{8}},
		{"min height", Detect{MinSNR: 3, MinHeight: 100}, []float64{3, 13}},
		{"min area", Detect{MinSNR: 3, MinArea: 800}, []float64{13}},
		// S/N of the wide peak is 2·50/h ≈ 15 (h ≈ 6.5 for SD 1).
		{"min snr", Detect{MinSNR: 20}, []float64{3, 13}},
	} {
		t.Run(tc.name, func(t *testing.T) {
			r := pkRun(16, 20, shapes, nil, 1, 3)
			pkAnalyse(t, &tc.d, &Integrate{}, r)
			if len(r.Peaks) != len(tc.want) {
				t.Fatalf("%d peaks, want %d", len(r.Peaks), len(tc.want))
			}
			for i, p := range r.Peaks {
				if math.Abs(p.RT-tc.want[i]) > 0.01 {
					t.Errorf("peak %d at %g min, want %g", i, p.RT, tc.want[i])
				}
				// The filters act on the figures integrate reports.
				if p.WidthHalf < tc.d.MinWidth || p.Height < tc.d.MinHeight || p.Area < tc.d.MinArea || p.SNR < tc.d.MinSNR {
					t.Errorf("peak %d passes a filter it should fail: %+v", i, p)
				}
			}
		})
	}
}

func TestDetectNoiseWindow(t *testing.T) {
	// Noise of SD 2 in 20–25 min and 1 elsewhere: a named window measures
	// that stretch alone; the blocks see mostly SD 1.
	r := pkRun(30, 20, nil, nil, 1, 9)
	rng := pkRand{99}
	for i, x := range r.Trace.Time {
		if x >= 20 && x <= 25 {
			r.Processed[i] = 2 * rng.normal()
		}
	}
	pkDetect(t, &Detect{MinSNR: 3, NoiseWindow: &Window{20, 25}}, r)
	nz := *r.Noise
	if nz.Method != NoiseByWindow || nz.FromMin != 20 || nz.ToMin != 25 || math.Abs(nz.SD/2-1) > 0.05 {
		t.Errorf("noise %+v, want the window 20–25 min with SD 2 ± 5 %%", nz)
	}
	pkDetect(t, &Detect{MinSNR: 3}, r)
	if math.Abs(r.Noise.SD-1) > 0.05 {
		t.Errorf("block noise SD %g, want 1 ± 5 %%", r.Noise.SD)
	}
	// Ignored stretches stay out of the blocks: ignoring everything but
	// 20–25 min leaves only the noisier blocks.
	pkDetect(t, &Detect{MinSNR: 3, Ignore: []Window{{0, 19.99}, {25.01, 30}}}, r)
	if math.Abs(r.Noise.SD/2-1) > 0.05 {
		t.Errorf("block noise SD %g outside ignore windows, want 2 ± 5 %%", r.Noise.SD)
	}
}

func TestDetectNoiseFree(t *testing.T) {
	// A noise-free signal measures zero noise (the peak covers two of ten
	// noise blocks): S/N must stay finite.
	for _, tc := range []struct {
		name   string
		shapes []pkShape
		peaks  int
	}{
		{"all zero", nil, 0},
		{"one Gaussian", []pkShape{{100, 2, 0.02, 0}}, 1},
	} {
		t.Run(tc.name, func(t *testing.T) {
			r := pkRun(10, 20, tc.shapes, nil, 0, 1)
			pkAnalyse(t, &Detect{MinSNR: 3}, &Integrate{}, r)
			pkCheckPeaks(t, r)
			if !(r.Noise.PeakToPeak > 0) || !(r.Noise.SD > 0) {
				t.Errorf("noise %+v, want a positive floor", *r.Noise)
			}
			if len(r.Peaks) != tc.peaks {
				t.Errorf("%d peaks, want %d", len(r.Peaks), tc.peaks)
			}
			if len(r.Warnings) != 1 || !strings.Contains(r.Warnings[0], "noise") {
				t.Errorf("warnings %q, want one about the noise", r.Warnings)
			}
		})
	}
}

func TestDetectDeterministic(t *testing.T) {
	shapes := []pkShape{{800, 2, 0.02, 0.02}, {90, 2.1, 0.02, 0.01}, {40, 6, 0.03, 0.05}}
	var first *Run
	for range 3 {
		r := pkRun(8, 20, shapes, nil, 1, 5)
		pkAnalyse(t, &Detect{MinSNR: 3}, &Integrate{}, r)
		if first == nil {
			first = r
			continue
		}
		if !reflect.DeepEqual(r.Peaks, first.Peaks) || !reflect.DeepEqual(r.Noise, first.Noise) {
			t.Fatal("two runs on the same input differ")
		}
	}
}

func TestDetectErrors(t *testing.T) {
	good := func() *Run { return pkRun(2, 20, nil, nil, 1, 1) }
	for _, tc := range []struct {
		name string
		d    Detect
		r    func() *Run
		want string
	}{
		{"negative snr", Detect{MinSNR: -1}, good, "minimum S/N"},
		{"NaN width", Detect{MinWidth: math.NaN()}, good, "minimum width"},
		{"infinite area", Detect{MinArea: math.Inf(1)}, good, "minimum area"},
		{"negative block", Detect{NoiseBlock: -2}, good, "noise block"},
		{"even slope window", Detect{SlopeWindow: 8}, good, "slope window"},
		{"tiny slope window", Detect{SlopeWindow: 1}, good, "slope window"},
		{"reversed ignore", Detect{Ignore: []Window{{3, 1}}}, good, "from must not be after to"},
		{"empty noise window", Detect{NoiseWindow: &Window{1.5, 1.5001}}, good, "noise window"},
		{"baseline length", Detect{}, func() *Run { r := good(); r.Baseline = []float64{1}; return r }, "baseline"},
		{"time length", Detect{}, func() *Run { r := good(); r.Trace.Time = r.Trace.Time[1:]; return r }, "times"},
		{"time order", Detect{}, func() *Run { r := good(); r.Trace.Time[5] = 0; return r }, "increase"},
		{"NaN signal", Detect{}, func() *Run { r := good(); r.Processed[7] = math.NaN(); return r }, "NaN"},
	} {
		t.Run(tc.name, func(t *testing.T) {
			err := tc.d.Run(context.Background(), tc.r())
			if err == nil || !strings.Contains(err.Error(), tc.want) {
				t.Errorf("error %v, want one mentioning %q", err, tc.want)
			}
		})
	}
	ctx, cancel := context.WithCancel(context.Background())
	cancel()
	if err := (&Detect{}).Run(ctx, good()); !errors.Is(err, context.Canceled) {
		t.Errorf("cancelled: error %v, want context.Canceled", err)
	}
}

func TestDetectShortTraces(t *testing.T) {
	for n := range 8 {
		tm := make([]float64, n)
		sig := make([]float64, n)
		for i := range tm {
			tm[i] = float64(i) / 1200
			sig[i] = float64(i % 3)
		}
		r := NewRun(Trace{Time: tm, Signal: sig}, nil)
		pkAnalyse(t, &Detect{MinSNR: 3}, &Integrate{}, r)
		pkCheckPeaks(t, r)
		if r.Peaks == nil || r.Noise == nil {
			t.Errorf("%d points: peaks %v, noise %v; want both set", n, r.Peaks, r.Noise)
		}
	}
}

func FuzzDetect(f *testing.F) {
	f.Add([]byte{0, 1, 2, 3, 50, 120, 50, 3, 2, 1, 0, 0, 0, 1, 0})
	f.Add([]byte("a flat stretch then a peak: ~~~~~~~~~~~~ }}}}~~~~"))
	f.Add(make([]byte, 64))
	f.Add([]byte{255, 0, 255, 0, 255, 0, 255, 0, 255, 0, 255})
	f.Fuzz(func(t *testing.T, data []byte) {
		tm := make([]float64, len(data))
		sig := make([]float64, len(data))
		for i, b := range data {
			tm[i] = float64(i) / 1200
			sig[i] = float64(int8(b))
		}
		r := NewRun(Trace{Time: tm, Signal: sig}, nil)
		pkAnalyse(t, &Detect{MinSNR: 3}, &Integrate{}, r)
		pkCheckPeaks(t, r)
	})
}

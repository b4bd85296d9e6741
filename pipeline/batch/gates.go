package batch

import (
	"fmt"
	"math"
	"strings"

	"lotgate/pipeline"
	"lotgate/rules"
	"lotgate/steps"
	"lotgate/steps/calib"
	"lotgate/steps/dsp"
)

// constants returns the plate-number and resolution constants of a set.
func constants(set string) (cN, cR float64) {
	if set == steps.ConstantsExact {
		return dsp.PlatesExact, dsp.ResolutionExact
	}
	return dsp.PlatesPharmacopoeia, dsp.ResolutionPharmacopoeia
}

// formulas writes out the formulas a suitability block uses.
func formulas(s *pipeline.Suitability) []string {
	n, r := "N = 5.54·(tR/wh)²", "Rs = 1.18·(tR2 − tR1)/(wh1 + wh2)"
	if s.Constants == steps.ConstantsExact {
		n, r = "N = 8·ln 2·(tR/wh)² (8 ln 2 = 5.545177…)", "Rs = √(2·ln 2)·(tR2 − tR1)/(wh1 + wh2) (√(2 ln 2) = 1.177410…)"
	}
	return []string{n, r, "symmetry factor = W0.05/(2f)",
		fmt.Sprintf("S/N = 2H/h, h the range of the noise over %s half-height widths (%s)", num(s.NoiseWindow), s.Noise)}
}

// evaluateGates evaluates every suitability gate over the sequence and
// invalidates the samples a failed gate affects: every sample for a gate on
// the system (resolution, symmetry, plates, signal-to-noise, precision,
// blank), the bracketed samples for the drift gate.
func (e *evaluation) evaluateGates() {
	s := e.p.Suitability
	if s == nil {
		return
	}
	e.suit = &SuitabilityRec{Constants: s.Constants, Formulas: formulas(s), NoiseWindow: s.NoiseWindow, Noise: s.Noise}
	for _, g := range s.Gates {
		var gr GateRec
		if g.Kind == pipeline.GateDrift {
			gr = e.driftGate(g)
		} else {
			switch g.Kind {
			case pipeline.GateBlank:
				gr = e.blankGate(g)
			case pipeline.GatePrecision:
				gr = e.precisionGate(g)
			default:
				gr = e.peakGate(g, s)
			}
			if gr.Status != rules.Pass {
				reason := gr.Name + " failed: " + gr.Reason
				for _, o := range e.samples() {
					o.invalidate(reason)
					gr.Invalidates = append(gr.Invalidates, o.Number)
				}
			}
		}
		e.suit.Gates = append(e.suit.Gates, gr)
	}
}

// newGate starts a gate's record.
func newGate(g pipeline.Gate) GateRec {
	return GateRec{Gate: g.Kind, Name: g.Name(), Criterion: criterion(g), Status: rules.Pass}
}

// criterion writes a gate's acceptance criterion.
func criterion(g pipeline.Gate) string {
	bounds := func(unit string) string {
		switch {
		case g.Min != nil && g.Max != nil:
			return num(*g.Min) + " to " + num(*g.Max) + unit
		case g.Min != nil:
			return "≥ " + num(*g.Min) + unit
		case g.Max != nil:
			return "≤ " + num(*g.Max) + unit
		}
		return ""
	}
	switch g.Kind {
	case pipeline.GatePrecision:
		if g.UpperLimit != nil {
			return fmt.Sprintf("RSD ≤ Ph. Eur. 2.2.46 maximum for an upper limit of %s %%, at least %d injections", num(*g.UpperLimit), g.MinInjections)
		}
		return fmt.Sprintf("RSD ≤ %s %%, at least %d injections", num(*g.MaxRSD), g.MinInjections)
	case pipeline.GateBlank:
		var parts []string
		if g.MaxSNR != nil {
			parts = append(parts, "S/N > "+num(*g.MaxSNR))
		}
		if g.MaxArea != nil {
			parts = append(parts, "area > "+num(*g.MaxArea))
		}
		return "no peak of " + strings.Join(g.Components, ", ") + " in a blank with " + strings.Join(parts, " or ")
	case pipeline.GateDrift:
		return "|difference from the opening standards| " + bounds(" %")
	}
	return bounds("")
}

// withinBounds reports whether x meets the gate's bounds.
func withinBounds(g pipeline.Gate, x float64) bool {
	return (g.Min == nil || x >= *g.Min) && (g.Max == nil || x <= *g.Max)
}

// peakGate evaluates a gate on one peak figure (resolution, symmetry,
// plates, signal-to-noise) in every suitability injection: each must meet
// it; the gate's value is the worst.
func (e *evaluation) peakGate(g pipeline.Gate, s *pipeline.Suitability) GateRec {
	gr := newGate(g)
	cN, cR := constants(s.Constants)
	worst := math.NaN()
	badness := func(x float64) float64 { // how far x lies towards failing
		switch {
		case g.Min != nil && g.Max != nil: // symmetry: distance from the middle of the range
			return math.Abs(x - (*g.Min+*g.Max)/2)
		case g.Min != nil:
			return -x
		}
		return x
	}
	var fails []string
	for i, o := range e.outs {
		if o.Role != RoleSuitability {
			continue
		}
		gv := GateValueRec{Injection: o.Number, ID: o.ID, Status: rules.Pass}
		if len(g.Components) == 1 {
			gv.Component = g.Components[0]
		}
		var x float64
		var why string
		if o.Record == nil {
			why = "could not be processed"
		} else {
			switch g.Kind {
			case pipeline.GateResolution:
				x, why = resolutionIn(o.Record, g.Components[0], g.Components[1], cR)
			case pipeline.GateSymmetry:
				x, why = figureOf(o.Record, g.Components[0], "symmetry factor", func(p *pipeline.PeakRec) *float64 { return p.Tailing })
			case pipeline.GatePlates:
				x, why = platesIn(o.Record, g.Components[0], cN)
			case pipeline.GateSignalToNoise:
				x, why = e.signalToNoise(i, g.Components[0], s)
			}
		}
		if why != "" {
			gv.Status, gv.Note = rules.Fail, why
			fails = append(fails, fmt.Sprintf("injection %d (%s): %s", o.Number, o.ID, why))
		} else {
			v := x
			gv.Value = &v
			if math.IsNaN(worst) || badness(x) > badness(worst) {
				worst = x
			}
			if !withinBounds(g, x) {
				gv.Status = rules.Fail
				fails = append(fails, fmt.Sprintf("injection %d (%s): %s, outside %s", o.Number, o.ID, num(round(x, 3)), gr.Criterion))
			}
		}
		if gv.Status != rules.Pass {
			o.fail(gr.Name + ": " + strings.TrimPrefix(fails[len(fails)-1], fmt.Sprintf("injection %d (%s): ", o.Number, o.ID)))
		}
		gr.Values = append(gr.Values, gv)
	}
	if !math.IsNaN(worst) {
		gr.Value = &worst
	}
	switch {
	case len(gr.Values) == 0:
		gr.Status, gr.Reason = rules.Fail, "the sequence has no suitability injection"
	case len(fails) > 0:
		gr.Status, gr.Reason = rules.Fail, strings.Join(fails, "; ")
	}
	return gr
}

// resolutionIn is Rs between two components' peaks, from their retention
// times and half-height widths, with the constant c.
func resolutionIn(rec *pipeline.Record, a, b string, c float64) (float64, string) {
	pa, why := peakOf(rec, a)
	if why != "" {
		return 0, why
	}
	pb, why := peakOf(rec, b)
	if why != "" {
		return 0, why
	}
	if pa.WidthHalfMin == nil || pb.WidthHalfMin == nil {
		return 0, "a half-height width could not be measured"
	}
	return dsp.Resolution(math.Min(pa.RTMin, pb.RTMin), math.Max(pa.RTMin, pb.RTMin), *pa.WidthHalfMin, *pb.WidthHalfMin, c), ""
}

// platesIn is the plate number of a component's peak with the constant c.
func platesIn(rec *pipeline.Record, comp string, c float64) (float64, string) {
	p, why := peakOf(rec, comp)
	if why != "" {
		return 0, why
	}
	if p.WidthHalfMin == nil {
		return 0, comp + ": the half-height width could not be measured"
	}
	return dsp.PlateNumber(p.RTMin, *p.WidthHalfMin, c), ""
}

// figureOf reads one figure of a component's peak from the record.
func figureOf(rec *pipeline.Record, comp, what string, get func(*pipeline.PeakRec) *float64) (float64, string) {
	p, why := peakOf(rec, comp)
	if why != "" {
		return 0, why
	}
	if v := get(p); v != nil {
		return *v, ""
	}
	return 0, comp + ": the " + what + " could not be measured"
}

// signalToNoise is S/N = 2H/h of a component's peak in injection i: H its
// height, h the range of the noise over NoiseWindow half-height widths,
// after removing a least-squares straight line, in the blank injected
// nearest before it (after it when none is before), centred on the peak's
// retention time; or, with the injection itself as the noise source, the
// larger range of the two stretches of NoiseWindow/2 half-height widths
// just before and after the peak.
func (e *evaluation) signalToNoise(i int, comp string, s *pipeline.Suitability) (float64, string) {
	rec := e.outs[i].Record
	p, why := peakOf(rec, comp)
	if why != "" {
		return 0, why
	}
	if p.WidthHalfMin == nil {
		return 0, comp + ": the half-height width could not be measured"
	}
	span := s.NoiseWindow * *p.WidthHalfMin
	var h float64
	if s.Noise == pipeline.NoiseFromInjection {
		before, ok1 := noiseRange(rec.Trace, p.StartMin-span/2, p.StartMin)
		after, ok2 := noiseRange(rec.Trace, p.EndMin, p.EndMin+span/2)
		if !ok1 || !ok2 {
			return 0, "the noise window beside the peak leaves the trace or holds fewer than 3 points"
		}
		h = math.Max(before, after)
	} else {
		blank := e.blankFor(i)
		if blank == nil {
			return 0, "no processed blank injection to measure the noise in"
		}
		var ok bool
		if h, ok = noiseRange(blank.Record.Trace, p.RTMin-span/2, p.RTMin+span/2); !ok {
			return 0, fmt.Sprintf("the noise window of blank injection %d leaves its trace or holds fewer than 3 points", blank.Number)
		}
	}
	if !(h > 0) {
		return 0, "the noise range is zero"
	}
	return dsp.SignalToNoise(p.Height, h), ""
}

// blankFor returns the processed blank injected nearest before injection i,
// or nearest after it when there is none before; nil when there is none.
func (e *evaluation) blankFor(i int) *Outcome {
	for j := i - 1; j >= 0; j-- {
		if o := e.outs[j]; o.Role == RoleBlank && o.Record != nil {
			return o
		}
	}
	for j := i + 1; j < len(e.outs); j++ {
		if o := e.outs[j]; o.Role == RoleBlank && o.Record != nil {
			return o
		}
	}
	return nil
}

// noiseRange is the range (max − min) of the baseline-corrected working
// signal of a trace between two times (min), after removing its
// least-squares straight line; ok is false when the window leaves the
// trace or holds fewer than 3 points.
func noiseRange(tr *pipeline.TraceRec, from, to float64) (float64, bool) {
	if tr == nil || !(tr.IntervalMin > 0) {
		return 0, false
	}
	sig := tr.Processed
	if len(sig) == 0 {
		sig = tr.Raw
	}
	n := len(sig)
	i0 := int(math.Ceil((from-tr.StartMin)/tr.IntervalMin - 1e-9))
	i1 := int(math.Floor((to-tr.StartMin)/tr.IntervalMin + 1e-9))
	if i0 < 0 || i1 >= n || i1-i0+1 < 3 {
		return 0, false
	}
	y := make([]float64, i1-i0+1)
	for k := range y {
		y[k] = sig[i0+k]
		if len(tr.Baseline) == n {
			y[k] -= tr.Baseline[i0+k]
		}
	}
	_, h := dsp.NoiseWindow(y)
	return h, true
}

// precisionGate is the %RSD of a component's response over the suitability
// injections, against a fixed limit or the Ph. Eur. 2.2.46 maximum.
func (e *evaluation) precisionGate(g pipeline.Gate) GateRec {
	gr := newGate(g)
	comp := g.Components[0]
	var ys []float64
	var fails []string
	for _, o := range e.outs {
		if o.Role != RoleSuitability {
			continue
		}
		gv := GateValueRec{Injection: o.Number, ID: o.ID, Component: comp, Status: rules.Pass}
		switch {
		case o.Record == nil:
			gv.Status, gv.Note = rules.Fail, "could not be processed"
		default:
			if r := e.responseOf(o.Record, comp); r.ok() {
				y := r.y
				gv.Value = &y
				ys = append(ys, y)
			} else {
				gv.Status, gv.Note = rules.Fail, r.missing+r.problem
			}
		}
		if gv.Status != rules.Pass {
			fails = append(fails, fmt.Sprintf("injection %d (%s): %s", o.Number, o.ID, gv.Note))
			o.fail(gr.Name + ": " + gv.Note)
		}
		gr.Values = append(gr.Values, gv)
	}
	if len(fails) > 0 {
		gr.Status, gr.Reason = rules.Fail, strings.Join(fails, "; ")
		return gr
	}
	if len(ys) < g.MinInjections {
		gr.Status, gr.Reason = rules.Fail, fmt.Sprintf("%d suitability injections; at least %d are needed", len(ys), g.MinInjections)
		return gr
	}
	st, err := calib.Summarise(ys)
	if err != nil {
		gr.Status, gr.Reason = rules.Fail, err.Error()
		return gr
	}
	rsd := st.RSD
	gr.Value = &rsd
	limit := 0.0
	if g.MaxRSD != nil {
		limit = *g.MaxRSD
	} else {
		if limit, err = calib.MaxRSD(*g.UpperLimit, st.N); err != nil {
			gr.Status, gr.Reason = rules.Fail, err.Error()
			return gr
		}
		gr.Criterion = fmt.Sprintf("RSD ≤ %s %% (Ph. Eur. 2.2.46 maximum for %d injections and an upper limit of %s %%)",
			num(round(limit, 3)), st.N, num(*g.UpperLimit))
	}
	gr.Limit = &limit
	if rsd > limit {
		gr.Status, gr.Reason = rules.Fail, fmt.Sprintf("RSD %s %% of %d injections is above %s %%", num(round(rsd, 3)), st.N, num(round(limit, 3)))
	}
	return gr
}

// blankGate checks every blank injection: no peak at the named components
// above the thresholds.
func (e *evaluation) blankGate(g pipeline.Gate) GateRec {
	gr := newGate(g)
	var fails []string
	worst := math.NaN()
	for _, o := range e.outs {
		if o.Role != RoleBlank {
			continue
		}
		if o.Record == nil {
			gr.Values = append(gr.Values, GateValueRec{Injection: o.Number, ID: o.ID, Status: rules.Fail, Note: "could not be processed"})
			fails = append(fails, fmt.Sprintf("blank injection %d (%s) could not be processed", o.Number, o.ID))
			continue
		}
		for _, comp := range g.Components {
			gv := GateValueRec{Injection: o.Number, ID: o.ID, Component: comp, Status: rules.Pass}
			p, why := peakOf(o.Record, comp)
			if why != "" {
				gv.Note = why
				gr.Values = append(gr.Values, gv)
				continue
			}
			x := p.SNR
			if g.MaxSNR == nil {
				x = p.Area
			}
			gv.Value = &x
			worst = math.Max(nanTo(worst, x), x)
			var over []string
			if g.MaxSNR != nil && p.SNR > *g.MaxSNR {
				over = append(over, fmt.Sprintf("S/N %s above %s", num(round(p.SNR, 1)), num(*g.MaxSNR)))
			}
			if g.MaxArea != nil && p.Area > *g.MaxArea {
				over = append(over, fmt.Sprintf("area %s above %s", num(round(p.Area, 4)), num(*g.MaxArea)))
			}
			if len(over) > 0 {
				gv.Status, gv.Note = rules.Fail, strings.Join(over, ", ")
				msg := fmt.Sprintf("a peak of %s at %s min (%s)", comp, num(round(p.RTMin, 3)), gv.Note)
				fails = append(fails, fmt.Sprintf("blank injection %d (%s): %s", o.Number, o.ID, msg))
				o.fail("unclean blank: " + msg)
			}
			gr.Values = append(gr.Values, gv)
		}
	}
	if !math.IsNaN(worst) {
		gr.Value = &worst
	}
	switch {
	case len(gr.Values) == 0:
		gr.Status, gr.Reason = rules.Fail, "the sequence has no blank injection"
	case len(fails) > 0:
		gr.Status, gr.Reason = rules.Fail, strings.Join(fails, "; ")
	}
	return gr
}

func nanTo(x, def float64) float64 {
	if math.IsNaN(x) {
		return def
	}
	return x
}

// driftGate compares every check standard injected after the first sample
// with the opening injections of the same standard (those before the first
// sample): the response of each component may differ from their mean by at
// most Max %. The samples since the previous check (or the start) are
// bracketed by a check; a check that fails, or a sample that no check
// follows, makes them invalid.
func (e *evaluation) driftGate(g pipeline.Gate) GateRec {
	gr := newGate(g)
	firstSample := -1
	for i, o := range e.outs {
		if o.Role == RoleSample {
			firstSample = i
			break
		}
	}
	if firstSample < 0 {
		gr.Reason = "no sample to bracket"
		return gr
	}
	comps := g.Components
	if len(comps) == 0 && e.p.Calibration != nil {
		for _, c := range e.p.Calibration.Components {
			comps = append(comps, c.Name)
		}
	}
	// Opening responses per standard and component.
	opening := map[[2]string][]float64{}
	for _, o := range e.outs[:firstSample] {
		if o.Standard == nil || o.Record == nil {
			continue
		}
		for _, c := range comps {
			if r := e.responseOf(o.Record, c); r.ok() {
				k := [2]string{o.Standard.Name, c}
				opening[k] = append(opening[k], r.y)
			}
		}
	}
	var fails []string
	worst := math.NaN()
	var bracket []*Outcome // samples since the last check
	for _, o := range e.outs[firstSample:] {
		switch o.Role {
		case RoleSample:
			bracket = append(bracket, o)
			continue
		case RoleCheck:
		default:
			continue
		}
		var problems []string
		if o.Record == nil {
			problems = append(problems, "could not be processed")
			gr.Values = append(gr.Values, GateValueRec{Injection: o.Number, ID: o.ID, Status: rules.Fail, Note: "could not be processed"})
		}
		for _, c := range comps {
			if o.Record == nil {
				break
			}
			if _, holds := o.Standard.Amount(c); !holds {
				continue
			}
			gv := GateValueRec{Injection: o.Number, ID: o.ID, Component: c, Status: rules.Pass}
			ref := opening[[2]string{o.Standard.Name, c}]
			r := e.responseOf(o.Record, c)
			switch {
			case len(ref) == 0:
				gv.Status, gv.Note = rules.Fail, fmt.Sprintf("no opening injection of standard %s to compare with", o.Standard.Name)
			case !r.ok():
				gv.Status, gv.Note = rules.Fail, r.missing+r.problem
			default:
				d, err := calib.Drift(mean(ref), r.y)
				if err != nil {
					gv.Status, gv.Note = rules.Fail, err.Error()
					break
				}
				gv.Value = &d
				if math.IsNaN(worst) || math.Abs(d) > math.Abs(worst) {
					worst = d
				}
				if !(math.Abs(d) <= *g.Max) {
					gv.Status = rules.Fail
					gv.Note = fmt.Sprintf("%s %s %% from the opening standards, beyond ±%s %%", c, signed(round(d, 2)), num(*g.Max))
				}
			}
			if gv.Status != rules.Pass {
				problems = append(problems, gv.Note)
			}
			gr.Values = append(gr.Values, gv)
		}
		if len(problems) > 0 {
			msg := fmt.Sprintf("check standard %s (injection %d): %s", o.Standard.Name, o.Number, strings.Join(problems, ", "))
			o.fail("bracketing drift: " + strings.Join(problems, ", "))
			if len(bracket) > 0 {
				msg += "; injections " + numbers(bracket) + " are not bracketed by a valid check"
			}
			fails = append(fails, msg)
			for _, s := range bracket {
				s.invalidate("bracketing drift: " + msg)
				gr.Invalidates = append(gr.Invalidates, s.Number)
			}
		}
		bracket = nil
	}
	if len(bracket) > 0 {
		msg := "injections " + numbers(bracket) + ": no check standard follows them"
		fails = append(fails, msg)
		for _, s := range bracket {
			s.invalidate("not bracketed: " + msg)
			gr.Invalidates = append(gr.Invalidates, s.Number)
		}
	}
	if !math.IsNaN(worst) {
		gr.Value = &worst
	}
	if len(fails) > 0 {
		gr.Status, gr.Reason = rules.Fail, strings.Join(fails, "; ")
	}
	return gr
}

func mean(v []float64) float64 {
	s := 0.0
	for _, x := range v {
		s += x
	}
	return s / float64(len(v))
}

// signed writes x with its sign: "+1.2", "−9.1".
func signed(x float64) string {
	if x < 0 {
		return "−" + num(-x)
	}
	return "+" + num(x)
}

// numbers writes the injection numbers of outcomes as "12–17" when they
// run on without a gap, else as a list "3, 5, 9".
func numbers(os []*Outcome) string {
	if len(os) == 0 {
		return ""
	}
	run := true
	for k := 1; k < len(os); k++ {
		run = run && os[k].Number == os[k-1].Number+1
	}
	if run && len(os) > 1 {
		return fmt.Sprintf("%d–%d", os[0].Number, os[len(os)-1].Number)
	}
	parts := make([]string, len(os))
	for k, o := range os {
		parts[k] = fmt.Sprint(o.Number)
	}
	return strings.Join(parts, ", ")
}

package batch

import (
	"fmt"
	"slices"
	"strings"
	"time"

	"lotgate/pipeline"
	"lotgate/rules"
	"lotgate/steps/calib"
)

// lots builds one lot record per lot, in the order the lots' first sample
// injections appear.
func (e *evaluation) lots() []*Lot {
	var order []string
	byLot := map[string][]*Outcome{}
	for _, o := range e.samples() {
		if byLot[o.Lot] == nil {
			order = append(order, o.Lot)
		}
		byLot[o.Lot] = append(byLot[o.Lot], o)
	}
	var out []*Lot
	for _, lot := range order {
		out = append(out, e.lot(lot, byLot[lot]))
	}
	return out
}

func (e *evaluation) lot(lot string, outs []*Outcome) *Lot {
	p, seq := e.p, e.seq
	l := &Lot{
		Schema: Schema,
		Provenance: LotProvenance{
			Tool: "lotgate", Version: pipeline.Version,
			PipelineFile: p.File, PipelineSHA256: p.Digest, BundleSHA256: p.Bundle,
			SequenceFile: seq.File, SequenceSHA256: seq.Digest,
			ProcessedAt: e.at.UTC().Format(time.RFC3339),
		},
		Lot:         lot,
		Sequence:    SequenceRec{Name: seq.Name, Description: seq.Description, Injections: len(seq.Injections)},
		Method:      LotMethod{Name: p.Name, Revision: p.Revision, Description: p.Description},
		Calibration: e.cal,
		Suitability: e.suit,
		Report:      p.Report,
		Reasons:     []string{},
		Warnings:    []string{},
	}
	if p.Calibration != nil {
		l.Method.Calibration = p.Calibration.Settings
	}
	if p.Suitability != nil {
		l.Method.Suitability = p.Suitability.Settings
	}
	if p.Replicates != nil {
		l.Method.Replicates = p.Replicates.Settings
	}
	for _, o := range e.outs {
		ir := InjectionRec{Number: o.Number, ID: o.ID, File: o.File, Role: o.Role,
			Lot: o.Lot, Sample: o.Sample, Replicate: o.Replicate, Status: o.Status, Reasons: o.Reasons}
		if o.Record != nil { // a file that could not be processed has no record
			ir.InputSHA256, ir.Record = o.Record.Provenance.InputSHA256, stemOf(o.File)+".json"
		}
		if o.Standard != nil {
			ir.Standard = o.Standard.Name
		}
		l.Injections = append(l.Injections, ir)
		for _, w := range o.warnings {
			l.Warnings = append(l.Warnings, fmt.Sprintf("injection %d (%s): %s", o.Number, o.ID, w))
		}
		if o.Err != nil && o.Role != RoleSample {
			l.Warnings = append(l.Warnings, fmt.Sprintf("injection %d (%s) could not be processed: %s", o.Number, o.ID, oneLine(o.Err)))
		}
	}
	// Samples in the order of their first injection.
	var names []string
	bySample := map[string][]*Outcome{}
	for _, o := range outs {
		if bySample[o.Sample] == nil {
			names = append(names, o.Sample)
		}
		bySample[o.Sample] = append(bySample[o.Sample], o)
	}
	for _, name := range names {
		reps := bySample[name]
		slices.SortStableFunc(reps, func(a, b *Outcome) int { return a.Replicate - b.Replicate })
		l.Samples = append(l.Samples, e.sample(name, reps))
	}
	l.Verdict, l.Reasons = verdictOf(l.Samples)
	return l
}

// sample combines a sample's replicate injections into its results.
func (e *evaluation) sample(name string, reps []*Outcome) SampleRec {
	s := SampleRec{Sample: name, Status: StatusValid}
	for _, o := range reps {
		s.Injections = append(s.Injections, o.Number)
		if o.Status == StatusInvalid {
			s.Status = StatusInvalid
			for _, r := range o.Reasons {
				if !slices.Contains(s.Reasons, r) {
					s.Reasons = append(s.Reasons, r)
				}
			}
		}
	}
	want := 0
	if e.p.Replicates != nil {
		want = e.p.Replicates.Count
	}
	processed := 0
	for _, o := range reps {
		if o.Record != nil {
			processed++
		}
	}
	for _, d := range e.p.Limits {
		if r, applies := e.result(d, reps, processed, want); applies {
			s.Results = append(s.Results, r)
		}
	}
	if s.Status == StatusInvalid {
		s.Verdict = StatusInvalid
		return s
	}
	var results []rules.Result
	for _, r := range s.Results {
		results = append(results, rules.Result{Status: r.Status})
	}
	s.Verdict = rules.Verdict(results)
	return s
}

// result combines one limit over a sample's replicates: the mean of the
// replicate values, rounded and checked as the limit says, with the
// replicates' SD and RSD against the replicate spread allowed. processed is
// the number of replicates that could be processed and want the number the
// pipeline needs (0: every replicate injected). applies is false when the
// limit applies to none of the replicates.
func (e *evaluation) result(d *pipeline.LimitDef, reps []*Outcome, processed, want int) (ResultRec, bool) {
	r := ResultRec{Name: d.Name, Expr: d.Expr, Min: d.Min, Max: d.Max, Digits: d.Digits, Unit: d.Unit,
		Rounding: string(d.Rounding), Replicates: []ReplicateRec{}}
	var xs []float64
	var missing, problems []string
	applied := 0
	for _, o := range reps {
		rr := ReplicateRec{Injection: o.Number, Replicate: o.Replicate}
		if o.Record == nil {
			rr.Note = "could not be processed"
			r.Replicates = append(r.Replicates, rr)
			continue
		}
		i := slices.IndexFunc(o.limits, func(v pipeline.LimitValue) bool { return v.Def == d })
		if i < 0 {
			rr.Note = "the limit does not apply"
			r.Replicates = append(r.Replicates, rr)
			continue
		}
		applied++
		v := o.limits[i]
		switch {
		case v.Problem != "":
			rr.Note = v.Problem
			problems = append(problems, fmt.Sprintf("replicate %d: %s", o.Replicate, v.Problem))
		case v.Value.Missing != "":
			rr.Note = v.Value.Missing
			missing = append(missing, v.Value.Missing)
		default:
			x := v.Value.X
			rr.Value = &x
			xs = append(xs, x)
		}
		r.Replicates = append(r.Replicates, rr)
	}
	if applied == 0 {
		return r, false
	}
	r.N = len(xs)
	if spread := e.maxRSD(d.Name); spread > 0 {
		r.MaxRSD = &spread
	}
	fail := func(reason string) (ResultRec, bool) {
		res := rules.Errored(d.Limit, reason)
		r.Status, r.Reason = res.Status, res.Reason
		if r.Reported == "" {
			r.Reported = "not determined"
		}
		return r, true
	}
	switch {
	case len(problems) > 0:
		return fail(strings.Join(problems, "; "))
	case processed < want:
		return fail(fmt.Sprintf("%d of the %d replicates needed could be processed", processed, want))
	case want == 0 && processed < len(reps):
		return fail(fmt.Sprintf("%d of the %d replicates injected could be processed", processed, len(reps)))
	case applied < processed:
		return fail(fmt.Sprintf("the limit applies to %d of %d replicates", applied, processed))
	case len(missing) > 0 && len(xs) > 0:
		return fail(fmt.Sprintf("a value in %d of %d replicates (%s in the others): no mean can be reported",
			len(xs), applied, strings.Join(slices.Compact(slices.Sorted(slices.Values(missing))), ", ")))
	case len(missing) > 0:
		reasons := slices.Compact(slices.Sorted(slices.Values(missing)))
		res := d.Limit.Check(rules.Value{Missing: strings.Join(reasons, ", ")})
		r.Reported, r.Status, r.Reason = res.Reported, res.Status, res.Reason
		return r, true
	}
	m := mean(xs)
	r.Mean = &m
	if len(xs) >= 2 {
		if st, err := calib.Summarise(xs); err == nil {
			r.SD, r.RSD = &st.SD, &st.RSD
		}
	}
	res := d.Limit.Check(rules.Value{X: m})
	r.Reported, r.Status, r.Reason = res.Reported, res.Status, res.Reason
	if r.MaxRSD != nil && r.RSD != nil && *r.RSD > *r.MaxRSD {
		reason := fmt.Sprintf("the replicates differ by RSD %s %%, more than the %s %% allowed", num(round(*r.RSD, 2)), num(*r.MaxRSD))
		if res.Reason != "" {
			reason += " (the mean: " + res.Reason + ")"
		}
		r.Status, r.Reason = rules.Erred, reason
	}
	return r, true
}

// maxRSD is the replicate spread allowed for a limit (0: none).
func (e *evaluation) maxRSD(limit string) float64 {
	if e.p.Replicates == nil {
		return 0
	}
	return e.p.Replicates.MaxRSDFor(limit)
}

// verdictOf decides a lot from its samples: invalid run if any sample is
// invalid, else rejected if any result fails, else undetermined if any
// result could not be determined, else released.
func verdictOf(samples []SampleRec) (string, []string) {
	var invalid, failed, undetermined []string
	for _, s := range samples {
		if s.Status == StatusInvalid {
			for _, r := range s.Reasons {
				if !slices.Contains(invalid, r) {
					invalid = append(invalid, r)
				}
			}
			continue
		}
		for _, r := range s.Results {
			line := fmt.Sprintf("%s, %s: %s", s.Sample, r.Name, r.Reason)
			switch r.Status {
			case rules.Pass:
			case rules.Fail:
				failed = append(failed, line)
			default:
				undetermined = append(undetermined, line)
			}
		}
	}
	switch {
	case len(invalid) > 0:
		return InvalidRun, invalid
	case len(failed) > 0:
		return Rejected, failed
	case len(undetermined) > 0:
		return Undetermined, undetermined
	}
	return Released, []string{}
}

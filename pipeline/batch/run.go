package batch

import (
	"context"
	"fmt"
	"slices"
	"strings"
	"sync"
	"time"

	"lotgate/pipeline"
	"lotgate/rules"
	"lotgate/steps"
)

// Options tune Run.
type Options struct {
	// Workers is the number of injections processed at once (1 when < 1).
	Workers int
	// At is the time written into every record.
	At time.Time
	// Progress, when set, is called after each injection is processed,
	// from one goroutine at a time, with the count done so far.
	Progress func(done, total int, inj *Injection, err error)
}

// Result is a processed sequence: every injection's record with the
// sequence's additions, the calibration and suitability results, and one
// lot record per lot.
type Result struct {
	Sequence    *Sequence
	Outcomes    []*Outcome
	Calibration *CalibrationRec
	Suitability *SuitabilityRec
	Lots        []*Lot
}

// Outcome is one injection after the sequence was evaluated.
type Outcome struct {
	*Injection
	// Record is the injection's record, with its batch part filled in;
	// nil when the file could not be processed (Err says why).
	Record *pipeline.Record
	Err    error
	// Status is StatusValid, StatusInvalid, StatusFailed or StatusError,
	// and Reasons say why it is not valid.
	Status  string
	Reasons []string

	limits   []pipeline.LimitValue
	amounts  map[string]pipeline.Amount
	warnings []string
}

// Run processes every injection of the sequence through the pipeline on a
// pool of workers, then evaluates the sequence: calibration, suitability
// gates, amounts, limits, replicates and lot verdicts. A file that cannot be
// processed does not stop the others; what depends on it fails or is
// undetermined, with the reason. Run returns an error only when the
// sequence does not fit the pipeline (a *pipeline.Error with diagnostics in the
// sequence file) or the context was cancelled.
func Run(ctx context.Context, p *pipeline.Pipeline, seq *Sequence, opt Options) (*Result, error) {
	if err := seq.Check(p); err != nil {
		return nil, err
	}
	if err := checkRules(p); err != nil {
		return nil, err
	}
	outs := process(ctx, p, seq, opt)
	if err := ctx.Err(); err != nil {
		return nil, err
	}
	return evaluate(p, seq, outs, opt.At), nil
}

// checkRules reports replicate rules that name no limit of the pipeline.
func checkRules(p *pipeline.Pipeline) error {
	if p.Replicates == nil {
		return nil
	}
	var names []string
	for _, l := range p.Limits {
		names = append(names, l.Name)
	}
	for _, r := range p.Replicates.Results {
		if !slices.Contains(names, r.Limit) {
			msg := fmt.Sprintf("%s:%d,%d: replicates: result %q names no limit of pipeline %q",
				r.Range.Filename, r.Range.Start.Line, r.Range.Start.Column, r.Limit, p.Name)
			if near := nearest(r.Limit, names); near != "" {
				msg += fmt.Sprintf("; did you mean %q?", near)
			}
			return fmt.Errorf("%s", msg)
		}
	}
	return nil
}

// process runs the pipeline on every injection, on opt.Workers goroutines.
// Outcomes keep the sequence order whatever order the workers finish in.
func process(ctx context.Context, p *pipeline.Pipeline, seq *Sequence, opt Options) []*Outcome {
	n := len(seq.Injections)
	outs := make([]*Outcome, n)
	jobs := make(chan int)
	var mu sync.Mutex
	done := 0
	var wg sync.WaitGroup
	for range min(max(opt.Workers, 1), n) {
		wg.Go(func() {
			for i := range jobs {
				inj := seq.Injections[i]
				o := &Outcome{Injection: inj}
				o.Record, o.Err = p.ProcessFile(ctx, inj.Path, opt.At)
				outs[i] = o
				if opt.Progress != nil {
					mu.Lock()
					done++
					opt.Progress(done, n, inj, o.Err)
					mu.Unlock()
				}
			}
		})
	}
	for i := range n {
		jobs <- i
	}
	close(jobs)
	wg.Wait()
	return outs
}

// evaluation is the sequence-level work done once every injection is
// processed; it runs on one goroutine, in sequence order.
type evaluation struct {
	p      *pipeline.Pipeline
	seq    *Sequence
	outs   []*Outcome
	at     time.Time
	curves map[string]*curve
	cal    *CalibrationRec
	suit   *SuitabilityRec
}

func evaluate(p *pipeline.Pipeline, seq *Sequence, outs []*Outcome, at time.Time) *Result {
	e := &evaluation{p: p, seq: seq, outs: outs, at: at, curves: map[string]*curve{}}
	for _, o := range outs {
		o.Status = StatusValid
		if o.Err != nil {
			o.Status = StatusError
			o.Reasons = append(o.Reasons, "could not be processed: "+oneLine(o.Err))
		}
		e.crossCheck(o)
	}
	e.calibrate()
	e.readAmounts()
	e.evaluateGates()
	e.checkLimits()
	res := &Result{Sequence: seq, Outcomes: outs, Calibration: e.cal, Suitability: e.suit}
	res.Lots = e.lots()
	e.finishRecords(res.Lots)
	return res
}

// crossCheck warns when a sample's data file names another sample or lot
// than the sequence does: a mix-up an analyst must look at.
func (e *evaluation) crossCheck(o *Outcome) {
	if o.Record == nil || o.Role != RoleSample {
		return
	}
	for _, m := range o.Record.Sample.Metadata {
		want := ""
		switch m.Key {
		case "sample_id":
			want = o.Sample
		case "lot":
			want = o.Lot
		default:
			continue
		}
		if m.Value != want {
			o.warnings = append(o.warnings, fmt.Sprintf("the data file's %s is %q but the sequence says %q for injection %s",
				m.Key, m.Value, want, o.ID))
		}
	}
}

// invalidate marks a sample injection invalid for a reason (once).
func (o *Outcome) invalidate(reason string) {
	if o.Status == StatusValid {
		o.Status = StatusInvalid
	}
	if !slices.Contains(o.Reasons, reason) {
		o.Reasons = append(o.Reasons, reason)
	}
}

// fail marks a blank or standard as failing its own check (once).
func (o *Outcome) fail(reason string) {
	if o.Status == StatusValid {
		o.Status = StatusFailed
	}
	if !slices.Contains(o.Reasons, reason) {
		o.Reasons = append(o.Reasons, reason)
	}
}

// samples returns the sample injections, in sequence order.
func (e *evaluation) samples() []*Outcome {
	var out []*Outcome
	for _, o := range e.outs {
		if o.Role == RoleSample {
			out = append(out, o)
		}
	}
	return out
}

// response is a component's response in one injection: its peak area, or
// the ratio of its area to the internal standard's.
type response struct {
	y float64
	// missing says why there is no response ("not detected") and problem
	// why none can be given at all (no internal standard peak).
	missing, problem string
}

func (r response) ok() bool { return r.missing == "" && r.problem == "" }

// responseOf returns the response of a component in a record.
func (e *evaluation) responseOf(rec *pipeline.Record, comp string) response {
	area, why := areaOf(rec, comp)
	if why != "" {
		return response{missing: why}
	}
	cal := e.p.Calibration
	if cal == nil || cal.Method != pipeline.InternalStandard {
		return response{y: area}
	}
	is, why := areaOf(rec, cal.InternalStandardName)
	if why != "" || !(is > 0) {
		if why == "" {
			why = "its area is not positive"
		}
		return response{problem: fmt.Sprintf("internal standard %s: %s", cal.InternalStandardName, why)}
	}
	return response{y: area / is}
}

// areaOf returns the area of a component's peak, or why there is none.
func areaOf(rec *pipeline.Record, comp string) (float64, string) {
	for _, c := range rec.Components {
		if c.Name != comp {
			continue
		}
		switch {
		case c.Status == steps.Found && c.Area != nil:
			return *c.Area, ""
		case c.Status == steps.Ambiguous:
			return 0, "ambiguous identification"
		}
		return 0, "not detected"
	}
	return 0, "not a component of the record"
}

// peakOf returns the peak of a component in a record, or why there is none.
func peakOf(rec *pipeline.Record, comp string) (*pipeline.PeakRec, string) {
	for _, c := range rec.Components {
		if c.Name != comp {
			continue
		}
		if c.Status != steps.Found || c.Peak == nil || *c.Peak < 1 || *c.Peak > len(rec.Peaks) {
			if c.Status == steps.Ambiguous {
				return nil, comp + ": ambiguous identification"
			}
			return nil, comp + " not detected"
		}
		return &rec.Peaks[*c.Peak-1], ""
	}
	return nil, comp + " is not a component of the record"
}

// checkLimits evaluates the limits of every processed injection with its
// amounts and writes them into its record.
func (e *evaluation) checkLimits() {
	for _, o := range e.outs {
		if o.Record == nil {
			continue
		}
		o.limits = e.p.EvalLimits(o.Record, o.amounts)
		var results []rules.Result
		var recs []pipeline.LimitRec
		for _, v := range o.limits {
			r := v.Result()
			results = append(results, r)
			recs = append(recs, pipeline.LimitRecOf(v.Def, r))
		}
		o.Record.Limits = recs
		o.Record.Verdict = rules.Verdict(results)
	}
}

// finishRecords writes each record's batch part: place, amounts, status.
func (e *evaluation) finishRecords(lots []*Lot) {
	lotOf := map[string]string{}
	for _, l := range lots {
		lotOf[l.Lot] = LotStem(l.Lot) + ".json"
	}
	unit := ""
	if e.p.Calibration != nil {
		unit = e.p.Calibration.Unit
	}
	for _, o := range e.outs {
		rec := o.Record
		if rec == nil {
			continue
		}
		b := &pipeline.BatchRec{
			SequenceFile: e.seq.File, SequenceSHA256: e.seq.Digest,
			Injection: o.Number, ID: o.ID, Role: o.Role,
			Status: o.Status, Reasons: o.Reasons,
		}
		if o.Standard != nil {
			b.Standard = o.Standard.Name
		}
		if o.Role == RoleSample {
			b.Lot, b.SampleID, b.Replicate, b.Dilution = o.Lot, o.Sample, o.Replicate, o.Dilution
			b.LotRecord = lotOf[o.Lot]
		}
		if e.p.Calibration != nil {
			for _, c := range e.p.Calibration.Components {
				b.Amounts = append(b.Amounts, e.amountRec(o, c.Name, unit))
			}
		}
		rec.Batch = b
		rec.Warnings = append(rec.Warnings, o.warnings...)
		if o.Status == StatusInvalid {
			rec.Verdict = rules.Undetermined
			rec.Warnings = append(rec.Warnings, "Invalid run: "+strings.Join(o.Reasons, "; ")+
				". The results of this injection may not be used for release.")
		}
	}
}

func oneLine(err error) string { return strings.ReplaceAll(err.Error(), "\n", "; ") }

// LotStem is the file name (without extension) of a lot's documents:
// "lot-" and the lot id with every character but letters, digits, '.',
// '_' and '-' replaced by '_'.
func LotStem(lot string) string {
	var b strings.Builder
	b.WriteString("lot-")
	for _, r := range lot {
		switch {
		case r >= 'a' && r <= 'z', r >= 'A' && r <= 'Z', r >= '0' && r <= '9', r == '.', r == '_', r == '-':
			b.WriteRune(r)
		default:
			b.WriteByte('_')
		}
	}
	return b.String()
}

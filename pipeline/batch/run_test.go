package batch

import (
	"bytes"
	"context"
	"fmt"
	"math"
	"os"
	"path/filepath"
	"strings"
	"testing"

	"lotgate/rules"
)

// checkRun is the closing check standard: S3 with A scaled by factor.
func checkRun(factor float64) run {
	return run{id: "check", role: RoleCheck, kind: "standard", attrs: `standard = "S3"`, a: 60 * factor, b: 20, c: 20}
}

func sequenceOf(parts ...[]run) []run {
	var out []run
	for _, p := range parts {
		out = append(out, p...)
	}
	return out
}

// A valid sequence releases its lot; amounts come from the calibration; the
// outputs do not depend on the number of workers.
func TestReleasedAndDeterministic(t *testing.T) {
	runs := sequenceOf(standardRuns(), sampleRuns("X", 25), []run{checkRun(1)})
	res1 := runSequence(t, suitabilityBlock, calStandards, runs, 1)
	res2 := runSequence(t, suitabilityBlock, calStandards, runs, 2)
	if len(res1.Lots) != 1 {
		t.Fatalf("%d lots, want 1", len(res1.Lots))
	}
	lot := res1.Lots[0]
	if lot.Verdict != Released {
		t.Fatalf("verdict %q %v, want released", lot.Verdict, lot.Reasons)
	}
	a := lot.Samples[0].Results[0]
	// The synthetic truth: 2 pA·s per mg/L, 25 mg/L ± 0.3 % per replicate
	// (common practice: a calibrated amount within 2 % of the truth).
	if a.Name != "A" || a.Mean == nil || math.Abs(*a.Mean-25) > 0.5 || a.N != 2 {
		t.Errorf("result A: %+v", a)
	}
	for i := range res1.Outcomes {
		x, err1 := res1.Outcomes[i].Record.Marshal()
		y, err2 := res2.Outcomes[i].Record.Marshal()
		if err1 != nil || err2 != nil || !bytes.Equal(x, y) {
			t.Errorf("injection %d: the record differs between 1 and 2 workers", i+1)
		}
	}
	x, _ := res1.Lots[0].Marshal()
	y, _ := res2.Lots[0].Marshal()
	if !bytes.Equal(x, y) {
		t.Error("the lot record differs between 1 and 2 workers")
	}
	rec := res1.Outcomes[len(runs)-2].Record // a sample replicate
	if rec.Batch == nil || rec.Batch.Status != StatusValid || rec.Batch.SampleID != "X" || rec.Batch.LotRecord != "lot-L1.json" {
		t.Fatalf("batch part: %+v", rec.Batch)
	}
	if am := rec.Batch.Amounts; len(am) != 1 || am[0].Amount == nil || !am[0].InRange || am[0].Unit != "mg/L" {
		t.Errorf("amounts: %+v", am)
	}
}

// A failed gate makes every sample it affects invalid, with the reason on
// each record and on the lot, and the lot an invalid run.
func TestFailedGates(t *testing.T) {
	unclean := standardRuns()
	unclean[0].a = 3 // A in the blank
	cases := []struct {
		name   string
		extra  string
		runs   []run
		reason string
	}{
		{"resolution", strings.Replace(suitabilityBlock, "min     = 1.5", "min     = 50", 1),
			sequenceOf(standardRuns(), sampleRuns("X", 25), []run{checkRun(1)}), "resolution B / C failed"},
		{"precision", strings.Replace(suitabilityBlock, "max_rsd        = 2", "max_rsd        = 0.01", 1),
			sequenceOf(standardRuns(), sampleRuns("X", 25), []run{checkRun(1)}), "injection precision A failed"},
		{"blank", suitabilityBlock, sequenceOf(unclean, sampleRuns("X", 25), []run{checkRun(1)}), "blank cleanliness failed"},
		{"drift", suitabilityBlock, sequenceOf(standardRuns(), sampleRuns("X", 25), []run{checkRun(0.9)}), "bracketing drift"},
		{"not bracketed", suitabilityBlock, sequenceOf(standardRuns(), sampleRuns("X", 25)), "no check standard follows"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			res := runSequence(t, c.extra, calStandards, c.runs, 2)
			lot := res.Lots[0]
			if lot.Verdict != InvalidRun || !strings.Contains(strings.Join(lot.Reasons, "\n"), c.reason) {
				t.Fatalf("verdict %q, reasons %q; want invalid run for %q", lot.Verdict, lot.Reasons, c.reason)
			}
			for _, o := range res.Outcomes {
				if o.Role != RoleSample {
					continue
				}
				rec := o.Record
				if rec.Batch.Status != StatusInvalid || rec.Verdict != rules.Undetermined ||
					!strings.Contains(strings.Join(rec.Batch.Reasons, "\n"), c.reason) ||
					!strings.Contains(strings.Join(rec.Warnings, "\n"), "Invalid run") {
					t.Errorf("injection %d: status %q, verdict %q, reasons %q", o.Number, rec.Batch.Status, rec.Verdict, rec.Batch.Reasons)
				}
			}
		})
	}
}

// A sample above the top standard is flagged, not extrapolated: its amount
// is out of range on the record and its result cannot be determined. One
// below the lowest standard is reported as below the range and passes a
// maximum.
func TestOutsideCalibratedRange(t *testing.T) {
	runs := sequenceOf(standardRuns(), sampleRuns("HIGH", 70), sampleRuns("LOW", 4), []run{checkRun(1)})
	res := runSequence(t, suitabilityBlock, calStandards, runs, 2)
	lot := res.Lots[0]
	if lot.Verdict != Undetermined {
		t.Fatalf("verdict %q %v, want undetermined", lot.Verdict, lot.Reasons)
	}
	high, low := lot.Samples[0].Results[0], lot.Samples[1].Results[0]
	if high.Status != rules.Erred || !strings.Contains(high.Reason, "above the calibrated range (10–50 mg/L)") {
		t.Errorf("high sample: %s %q", high.Status, high.Reason)
	}
	if low.Status != rules.Pass || low.Reported != "below the calibrated range (< 10 mg/L)" || low.Mean != nil {
		t.Errorf("low sample: %s %q", low.Status, low.Reported)
	}
	for _, o := range res.Outcomes {
		if o.Sample != "HIGH" {
			continue
		}
		am := o.Record.Batch.Amounts[0]
		if am.InRange || am.Amount == nil || *am.Amount < 60 || !strings.Contains(am.Note, "above the calibrated range") {
			t.Errorf("injection %d amount: %+v", o.Number, am)
		}
		if l := o.Record.Limits[0]; l.Status != rules.Erred || !strings.Contains(l.Reason, "not extrapolated") {
			t.Errorf("injection %d limit A: %s %q", o.Number, l.Status, l.Reason)
		}
	}
}

// Replicates further apart than allowed, or too few of them, leave the
// result undetermined.
func TestReplicateRules(t *testing.T) {
	spread := sampleRuns("X", 25)
	spread[1].a *= 1.2
	cases := []struct {
		name   string
		runs   []run
		reason string
	}{
		{"spread", sequenceOf(standardRuns(), spread, []run{checkRun(1)}), "the replicates differ by RSD"},
		{"too few", sequenceOf(standardRuns(), sampleRuns("X", 25)[:1], []run{checkRun(1)}), "1 of the 2 replicates"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			lot := runSequence(t, suitabilityBlock, calStandards, c.runs, 2).Lots[0]
			if lot.Verdict != Undetermined || !strings.Contains(strings.Join(lot.Reasons, "\n"), c.reason) {
				t.Errorf("verdict %q, reasons %q; want undetermined for %q", lot.Verdict, lot.Reasons, c.reason)
			}
		})
	}
}

// A calibration standard whose back-calculated amount is off by more than
// the accepted deviation fails the calibration and invalidates the run.
func TestCalibrationFailure(t *testing.T) {
	runs := sequenceOf(standardRuns(), sampleRuns("X", 25), []run{checkRun(1)})
	runs[3].a *= 1.3 // level 3 reads 30 % high
	res := runSequence(t, suitabilityBlock, calStandards, runs, 2)
	cal := res.Calibration.Components[0]
	if cal.Status != rules.Fail || res.Outcomes[3].Status != StatusFailed {
		t.Fatalf("calibration %s %v; injection 4 %s", cal.Status, cal.Reasons, res.Outcomes[3].Status)
	}
	if lot := res.Lots[0]; lot.Verdict != InvalidRun || !strings.Contains(lot.Reasons[0], "calibration of A failed") {
		t.Errorf("verdict %q %v", lot.Verdict, lot.Reasons)
	}
}

// A sequence that does not fit the pipeline is refused before anything is
// processed, with a diagnostic in the sequence file.
func TestSequenceDoesNotFit(t *testing.T) {
	runs := sequenceOf(standardRuns(), sampleRuns("X", 25))
	bad := strings.Replace(calStandards, "amounts = { A = 10 }", "amounts = { A = 10, Z = 3 }", 1)
	p := runSequenceErr(t, bad, runs)
	if !strings.Contains(p, `"Z" is not a component`) || !strings.Contains(p, "test.sequence.hcl:") {
		t.Errorf("error %q", p)
	}
}

func runSequenceErr(t *testing.T, standards string, runs []run) string {
	t.Helper()
	path := writeSequence(t, t.TempDir(), standards, runs)
	seq, err := Load(path)
	if err != nil {
		return err.Error()
	}
	p := mustPipeline(t, testPipeline)
	if err := seq.Check(p); err != nil {
		return err.Error()
	}
	return ""
}

// A file that cannot be processed does not stop the others: a sample
// replicate is missing from its result, a calibration standard fails the
// calibration; each says why.
func TestUnprocessableInjection(t *testing.T) {
	cases := []struct {
		name    string
		corrupt int // index of the run whose file is broken
		verdict string
		reason  string
	}{
		{"sample replicate", 10, Undetermined, "1 of the 2 replicates needed could be processed"},
		{"calibration standard", 2, InvalidRun, "calibration of A failed: injection 3 (cal2): could not be processed"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			runs := sequenceOf(standardRuns(), sampleRuns("X", 25), []run{checkRun(1)})
			dir := t.TempDir()
			path := writeSequence(t, dir, calStandards, runs)
			broken := filepath.Join(dir, fmt.Sprintf("%02d-%s.csv", c.corrupt+1, runs[c.corrupt].id))
			if err := os.WriteFile(broken, []byte("time,signal\n0,1\n"), 0o644); err != nil {
				t.Fatal(err)
			}
			seq, err := Load(path)
			if err != nil {
				t.Fatal(err)
			}
			res, err := Run(context.Background(), mustPipeline(t, testPipeline+suitabilityBlock), seq, Options{Workers: 2, At: testAt})
			if err != nil {
				t.Fatal(err)
			}
			o := res.Outcomes[c.corrupt]
			if o.Record != nil || o.Err == nil || o.Status != StatusError || !strings.Contains(o.Reasons[0], "could not be processed") {
				t.Errorf("broken injection: status %q, reasons %v, err %v", o.Status, o.Reasons, o.Err)
			}
			lot := res.Lots[0]
			if lot.Verdict != c.verdict || !strings.Contains(strings.Join(lot.Reasons, "\n"), c.reason) {
				t.Errorf("verdict %q, reasons %q; want %q with %q", lot.Verdict, lot.Reasons, c.verdict, c.reason)
			}
			if in := lot.Injections[c.corrupt]; in.Record != "" || in.InputSHA256 != "" {
				t.Errorf("the lot names a record for the broken injection: %+v", in)
			}
		})
	}
}

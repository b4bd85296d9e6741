package pipeline

import (
	"bytes"
	"encoding/json"
	"strconv"

	"lotgate/rules"
	"lotgate/steps"
)

// Schema names the record format; it changes only with an incompatible change.
const Schema = "lotgate.record/v1"

// Record is the result of one processed file: the contract that every report
// renders. Field order, slice order and number formatting are fixed, so the
// same input and pipeline give the same bytes.
type Record struct {
	Schema     string         `json:"schema"`
	Provenance Provenance     `json:"provenance"`
	Sample     Sample         `json:"sample"`
	Method     Method         `json:"method"`
	Units      Units          `json:"units"`
	Noise      *NoiseRec      `json:"noise"`
	Peaks      []PeakRec      `json:"peaks"`
	Components []ComponentRec `json:"components"`
	Quant      *QuantRec      `json:"quantitation"`
	Totals     *Totals        `json:"totals"`
	Limits     []LimitRec     `json:"limits"`
	Verdict    string         `json:"verdict"`
	Warnings   []string       `json:"warnings"`
	Batch      *BatchRec      `json:"batch,omitempty"`
	Report     ReportSettings `json:"report"`
	Trace      *TraceRec      `json:"trace"`
}

// Provenance ties the record to its raw data and its method version.
type Provenance struct {
	Tool           string `json:"tool"`
	Version        string `json:"version"`
	PipelineFile   string `json:"pipeline_file"`
	PipelineSHA256 string `json:"pipeline_sha256"`
	// BundleSHA256 names the frozen bundle the pipeline came from, if any.
	BundleSHA256 string `json:"bundle_sha256,omitempty"`
	InputFile    string `json:"input_file"`
	InputSHA256  string `json:"input_sha256"`
	// ProcessedAt is RFC 3339 UTC; it honours SOURCE_DATE_EPOCH.
	ProcessedAt string `json:"processed_at"`
	// LedgerHead names the watcher's ledger entry the record was made under,
	// as "SEQUENCE:SHA256"; empty outside the watcher.
	LedgerHead string `json:"ledger_head,omitempty"`
}

// Sample is the file's metadata, in file order.
type Sample struct {
	Metadata []MetaRec `json:"metadata"`
}

// MetaRec is one metadata entry.
type MetaRec struct {
	Key   string `json:"key"`
	Value string `json:"value"`
}

// Method describes the pipeline that made the record, every setting included.
type Method struct {
	Name        string         `json:"name"`
	Revision    int            `json:"revision"`
	Description string         `json:"description"`
	Input       map[string]any `json:"input"`
	Steps       []StepRec      `json:"steps"`
}

// StepRec is one step as run.
type StepRec struct {
	Step     string         `json:"step"`
	Settings map[string]any `json:"settings"`
}

// Units names the units of the record's numbers.
type Units struct {
	Time   string `json:"time"`
	Signal string `json:"signal"`
	Area   string `json:"area"`
}

// NoiseRec is the background noise estimate.
type NoiseRec struct {
	SD         float64  `json:"sd"`
	PeakToPeak float64  `json:"peak_to_peak"`
	Method     string   `json:"method"`
	FromMin    *float64 `json:"from_min,omitempty"`
	ToMin      *float64 `json:"to_min,omitempty"`
	BlockMin   *float64 `json:"block_min,omitempty"`
}

// PeakRec is one peak. Figures that could not be measured are null.
type PeakRec struct {
	Number       int      `json:"number"`
	Name         string   `json:"name"`
	Component    string   `json:"component"`
	RTMin        float64  `json:"rt_min"`
	StartMin     float64  `json:"start_min"`
	EndMin       float64  `json:"end_min"`
	Boundary     string   `json:"boundary"`
	Area         float64  `json:"area"`
	Height       float64  `json:"height"`
	WidthHalfMin *float64 `json:"width_half_min"`
	Width5Min    *float64 `json:"width_5pct_min"`
	Tailing      *float64 `json:"tailing"`
	Plates       *float64 `json:"plates"`
	SNR          float64  `json:"snr"`
	Resolution   *float64 `json:"resolution"`
	Percent      *float64 `json:"percent"`
	Reported     bool     `json:"reported"`
}

// ComponentRec is one declared component and what was found for it.
type ComponentRec struct {
	Name       string    `json:"name"`
	Main       bool      `json:"main"`
	ExpectedRT float64   `json:"expected_rt_min"`
	WindowMin  float64   `json:"window_min"`
	RRF        float64   `json:"rrf"`
	Status     string    `json:"status"`
	Peak       *int      `json:"peak"`
	RTMin      *float64  `json:"rt_min"`
	Area       *float64  `json:"area"`
	Percent    *float64  `json:"percent"`
	Reported   bool      `json:"reported"`
	Candidates []float64 `json:"candidates_rt_min,omitempty"`
}

// QuantRec says how percentages were computed.
type QuantRec struct {
	Method             string  `json:"method"`
	UnknownRRF         float64 `json:"unknown_rrf"`
	ReportingThreshold float64 `json:"reporting_threshold"`
	TotalArea          float64 `json:"total_area"`
}

// LimitRec is one checked specification line.
type LimitRec struct {
	Name     string   `json:"name"`
	Expr     string   `json:"value_expression"`
	Value    *float64 `json:"value"`
	Reported string   `json:"reported"`
	Min      string   `json:"min,omitempty"`
	Max      string   `json:"max,omitempty"`
	Digits   int      `json:"digits"`
	Unit     string   `json:"unit"`
	Rounding string   `json:"rounding"`
	Status   string   `json:"status"`
	Reason   string   `json:"reason,omitempty"`
}

// BatchRec is an injection's part of a sequence (absent for a file
// processed on its own): where it stands, what it is, the amounts read from
// the sequence's calibration and whether its results may be used.
type BatchRec struct {
	SequenceFile   string `json:"sequence_file"`
	SequenceSHA256 string `json:"sequence_sha256"`
	// Injection is the 1-based position in the sequence, ID its label.
	Injection int    `json:"injection"`
	ID        string `json:"id"`
	// Role is blank, calibration, suitability, check or sample.
	Role      string `json:"role"`
	Standard  string `json:"standard,omitempty"`
	Lot       string `json:"lot,omitempty"`
	SampleID  string `json:"sample_id,omitempty"`
	Replicate int    `json:"replicate,omitempty"`
	// Dilution multiplies the amounts read from the calibration (samples).
	Dilution float64     `json:"dilution,omitempty"`
	Amounts  []AmountRec `json:"amounts,omitempty"`
	// Status is "valid", "invalid" (a failed gate or calibration: the
	// results may not be used), or "failed" (a standard that failed its
	// own gate).
	Status  string   `json:"status"`
	Reasons []string `json:"reasons,omitempty"`
	// LotRecord names the lot record that uses this injection.
	LotRecord string `json:"lot_record,omitempty"`
}

// AmountRec is one calibrated component's amount in an injection. Amount
// is null when there is none; InRange is false for an amount outside the
// calibrated range, which is flagged in Note and never used as a result.
type AmountRec struct {
	Component string   `json:"component"`
	Response  *float64 `json:"response"`
	Amount    *float64 `json:"amount"`
	Unit      string   `json:"unit"`
	InRange   bool     `json:"in_range"`
	Note      string   `json:"note,omitempty"`
}

// TraceRec keeps the signals the reports draw. Times are implied by the even
// sampling: t_i = start_min + i·interval_min.
type TraceRec struct {
	Points      int       `json:"points"`
	StartMin    float64   `json:"start_min"`
	IntervalMin float64   `json:"interval_min"`
	Raw         []float64 `json:"raw"`
	Processed   []float64 `json:"processed"`
	Baseline    []float64 `json:"baseline"`
}

// Marshal returns the record as indented JSON with a final newline.
func (rec *Record) Marshal() ([]byte, error) {
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	enc.SetIndent("", " ")
	if err := enc.Encode(rec); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

func opt(x float64) *float64 {
	if x == 0 {
		return nil
	}
	return &x
}

// UnknownName names an unidentified peak by its retention time.
func UnknownName(rt float64) string { return "unknown " + strconv.FormatFloat(rt, 'f', 3, 64) }

func buildPeaks(r *steps.Run) []PeakRec {
	out := make([]PeakRec, len(r.Peaks))
	tm := r.Trace.Time
	for i, p := range r.Peaks {
		name := p.Component
		if name == "" {
			name = UnknownName(p.RT)
		}
		b := "baseline"
		switch {
		case p.StartDrop && p.EndDrop:
			b = "drop-both"
		case p.StartDrop:
			b = "drop-start"
		case p.EndDrop:
			b = "drop-end"
		}
		pr := PeakRec{
			Number: i + 1, Name: name, Component: p.Component, RTMin: p.RT,
			StartMin: tm[p.Start], EndMin: tm[p.End], Boundary: b,
			Area: p.Area, Height: p.Height,
			WidthHalfMin: opt(p.WidthHalf), Width5Min: opt(p.Width5), Tailing: opt(p.Tailing),
			Plates: opt(p.Plates), SNR: p.SNR, Resolution: opt(p.Resolution),
		}
		if r.Quant != nil {
			x := p.Percent
			pr.Percent, pr.Reported = &x, p.Reported
		}
		out[i] = pr
	}
	return out
}

func buildComponents(r *steps.Run) []ComponentRec {
	out := make([]ComponentRec, len(r.Components))
	for i, c := range r.Components {
		cr := ComponentRec{Name: c.Name, Main: c.Main, ExpectedRT: c.ExpectedRT, WindowMin: c.Window, RRF: c.RRF,
			Status: c.Status, Candidates: c.Candidates}
		if c.Status == steps.Found {
			p := r.Peaks[c.Peak]
			n, rt, area := c.Peak+1, p.RT, p.Area
			cr.Peak, cr.RTMin, cr.Area = &n, &rt, &area
			if r.Quant != nil {
				pct := p.Percent
				cr.Percent, cr.Reported = &pct, p.Reported
			}
		}
		out[i] = cr
	}
	return out
}

func buildLimits(defs []*LimitDef, results []rules.Result) []LimitRec {
	exprs := map[string]string{}
	for _, d := range defs {
		exprs[d.Name] = d.Expr
	}
	out := make([]LimitRec, len(results))
	for i, r := range results {
		out[i] = LimitRec{Name: r.Name, Expr: exprs[r.Name], Value: r.Value, Reported: r.Reported, Min: r.Min, Max: r.Max,
			Digits: r.Digits, Unit: r.Unit, Rounding: string(r.Rounding), Status: r.Status, Reason: r.Reason}
	}
	return out
}

package batch

import (
	"bytes"
	"encoding/json"

	"lotgate/pipeline"
)

// Schema names the lot record format; it changes only with an incompatible
// change.
const Schema = "lotgate.lot/v1"

// Lot verdicts.
const (
	// Released: the run is valid and every result of every sample of the
	// lot conforms.
	Released = "released"
	// Rejected: the run is valid and a result does not conform.
	Rejected = "rejected"
	// InvalidRun: a gate or the calibration failed for a sample of the lot,
	// so its results may not be used; no certificate is issued.
	InvalidRun = "invalid run"
	// Undetermined: the run is valid and nothing failed, but a result could
	// not be determined (too few replicates, replicates too far apart, an
	// amount above the calibrated range ...).
	Undetermined = "undetermined"
)

// Injection statuses.
const (
	StatusValid   = "valid"
	StatusInvalid = "invalid" // a sample whose results may not be used
	StatusFailed  = "failed"  // a blank or standard that failed its own check
	StatusError   = "error"   // could not be processed
)

// Lot is the lot record: the verdict on one lot of a sequence, with
// everything it rests on. Field order, slice order and number formatting
// are fixed, so the same inputs give the same bytes.
type Lot struct {
	Schema      string                  `json:"schema"`
	Provenance  LotProvenance           `json:"provenance"`
	Lot         string                  `json:"lot"`
	Sequence    SequenceRec             `json:"sequence"`
	Method      LotMethod               `json:"method"`
	Verdict     string                  `json:"verdict"`
	Reasons     []string                `json:"reasons"`
	Samples     []SampleRec             `json:"samples"`
	Injections  []InjectionRec          `json:"injections"`
	Calibration *CalibrationRec         `json:"calibration"`
	Suitability *SuitabilityRec         `json:"suitability"`
	Warnings    []string                `json:"warnings"`
	Report      pipeline.ReportSettings `json:"report"`
}

// LotProvenance ties the lot record to its pipeline, sequence and tool.
type LotProvenance struct {
	Tool           string `json:"tool"`
	Version        string `json:"version"`
	PipelineFile   string `json:"pipeline_file"`
	PipelineSHA256 string `json:"pipeline_sha256"`
	BundleSHA256   string `json:"bundle_sha256,omitempty"`
	SequenceFile   string `json:"sequence_file"`
	SequenceSHA256 string `json:"sequence_sha256"`
	// ProcessedAt is RFC 3339 UTC; it honours SOURCE_DATE_EPOCH.
	ProcessedAt string `json:"processed_at"`
}

// SequenceRec names the sequence.
type SequenceRec struct {
	Name        string `json:"name"`
	Description string `json:"description"`
	Injections  int    `json:"injections"`
}

// LotMethod is the pipeline's identity and its sequence-level settings as
// used, defaults included.
type LotMethod struct {
	Name        string         `json:"name"`
	Revision    int            `json:"revision"`
	Description string         `json:"description"`
	Calibration map[string]any `json:"calibration"`
	Suitability map[string]any `json:"suitability"`
	Replicates  map[string]any `json:"replicates"`
}

// InjectionRec is one injection of the sequence as the lot record lists it.
type InjectionRec struct {
	Number      int    `json:"number"`
	ID          string `json:"id"`
	File        string `json:"file"`
	InputSHA256 string `json:"input_sha256"`
	// Record names the injection's record ("" when it could not be
	// processed).
	Record    string   `json:"record"`
	Role      string   `json:"role"`
	Standard  string   `json:"standard,omitempty"`
	Lot       string   `json:"lot,omitempty"`
	Sample    string   `json:"sample,omitempty"`
	Replicate int      `json:"replicate,omitempty"`
	Status    string   `json:"status"`
	Reasons   []string `json:"reasons,omitempty"`
}

// CalibrationRec is the calibration of the sequence.
type CalibrationRec struct {
	Method           string            `json:"method"`
	InternalStandard string            `json:"internal_standard,omitempty"`
	Unit             string            `json:"unit"`
	Components       []CalComponentRec `json:"components"`
}

// CalComponentRec is one component's calibration curve, its statistics and
// its points.
type CalComponentRec struct {
	Component string `json:"component"`
	Model     string `json:"model"`
	Weighting string `json:"weighting"`
	// Response is "area" or "area ratio to NAME".
	Response string `json:"response"`
	// Coefficients are b0, b1[, b2] of response = b0 + b1·x [+ b2·x²];
	// StandardErrors their standard errors. Null when no curve was fitted.
	Coefficients   []float64 `json:"coefficients"`
	StandardErrors []float64 `json:"standard_errors"`
	R2             *float64  `json:"r2"`
	// ResidualSD is in weighted response units (response units when
	// unweighted); DF its degrees of freedom.
	ResidualSD *float64 `json:"residual_sd"`
	DF         int      `json:"df"`
	// LOD and LOQ are the ICH Q2 limits 3.3·σ/S and 10·σ/S in amount units,
	// σ and S the residual SD and slope of the unweighted straight line
	// through the calibration points; null with fewer than 3 points.
	LOD *float64 `json:"lod"`
	LOQ *float64 `json:"loq"`
	// RangeMin and RangeMax bound the calibrated range.
	RangeMin           float64       `json:"range_min"`
	RangeMax           float64       `json:"range_max"`
	MaxDeviation       float64       `json:"max_deviation_percent"`
	MaxDeviationLowest float64       `json:"max_deviation_lowest_percent"`
	MinR2              float64       `json:"min_r2,omitempty"`
	Points             []CalPointRec `json:"points"`
	Status             string        `json:"status"`
	Reasons            []string      `json:"reasons,omitempty"`
}

// CalPointRec is one calibration injection's point.
type CalPointRec struct {
	Injection int      `json:"injection"`
	ID        string   `json:"id"`
	Standard  string   `json:"standard"`
	Level     int      `json:"level,omitempty"`
	Amount    float64  `json:"amount"`
	Response  *float64 `json:"response"`
	Predicted *float64 `json:"predicted"`
	Residual  *float64 `json:"residual"`
	// BackCalculated is the amount read back through the curve and
	// Accuracy its percentage of Amount.
	BackCalculated *float64 `json:"back_calculated"`
	Accuracy       *float64 `json:"accuracy_percent"`
	Status         string   `json:"status"`
	Reason         string   `json:"reason,omitempty"`
}

// SuitabilityRec is the result of the system-suitability gates.
type SuitabilityRec struct {
	// Constants names the constant set used for N and Rs, and Formulas
	// writes them out.
	Constants   string    `json:"constants"`
	Formulas    []string  `json:"formulas"`
	NoiseWindow float64   `json:"noise_window_half_widths"`
	Noise       string    `json:"noise"`
	Gates       []GateRec `json:"gates"`
}

// GateRec is one gate's outcome.
type GateRec struct {
	Gate      string `json:"gate"`
	Name      string `json:"name"`
	Criterion string `json:"criterion"`
	// Value is the figure the gate was decided on: the worst single value,
	// or the RSD for precision.
	Value *float64 `json:"value"`
	// Limit is the number a precision gate compared the RSD with: the
	// fixed limit or the Ph. Eur. 2.2.46 maximum for the injections made.
	Limit  *float64       `json:"limit,omitempty"`
	Values []GateValueRec `json:"values"`
	Status string         `json:"status"`
	Reason string         `json:"reason,omitempty"`
	// Invalidates lists the sample injections a failure makes invalid.
	Invalidates []int `json:"invalidates,omitempty"`
}

// GateValueRec is a gate's figure in one injection.
type GateValueRec struct {
	Injection int      `json:"injection"`
	ID        string   `json:"id"`
	Component string   `json:"component,omitempty"`
	Value     *float64 `json:"value"`
	Status    string   `json:"status"`
	Note      string   `json:"note,omitempty"`
}

// SampleRec is one sample of the lot: its replicates combined into results.
type SampleRec struct {
	Sample     string      `json:"sample"`
	Injections []int       `json:"injections"`
	Status     string      `json:"status"`
	Reasons    []string    `json:"reasons,omitempty"`
	Results    []ResultRec `json:"results"`
	// Verdict is pass, fail or undetermined over the results, or "invalid".
	Verdict string `json:"verdict"`
}

// ResultRec is one limit over a sample's replicates: the values, their
// statistics, and the mean as reported and checked.
type ResultRec struct {
	Name       string         `json:"name"`
	Expr       string         `json:"value_expression"`
	Replicates []ReplicateRec `json:"replicates"`
	N          int            `json:"n"`
	Mean       *float64       `json:"mean"`
	SD         *float64       `json:"sd"`
	RSD        *float64       `json:"rsd_percent"`
	MaxRSD     *float64       `json:"max_rsd_percent"`
	Reported   string         `json:"reported"`
	Min        string         `json:"min,omitempty"`
	Max        string         `json:"max,omitempty"`
	Digits     int            `json:"digits"`
	Unit       string         `json:"unit"`
	Rounding   string         `json:"rounding"`
	Status     string         `json:"status"`
	Reason     string         `json:"reason,omitempty"`
}

// ReplicateRec is one replicate's value of a result.
type ReplicateRec struct {
	Injection int      `json:"injection"`
	Replicate int      `json:"replicate"`
	Value     *float64 `json:"value"`
	// Note says why there is no value ("not detected", a problem).
	Note string `json:"note,omitempty"`
}

// Marshal returns the lot record as indented JSON with a final newline.
func (l *Lot) Marshal() ([]byte, error) {
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	enc.SetIndent("", " ")
	if err := enc.Encode(l); err != nil {
		return nil, err
	}
	return b.Bytes(), nil
}

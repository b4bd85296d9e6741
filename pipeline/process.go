package pipeline

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"time"

	"lotgate/pipeline/input"
	"lotgate/rules"
	"lotgate/steps"
)

// RunTime is the time written into records: SOURCE_DATE_EPOCH (seconds since
// 1970, UTC) when it is set, else now. An unparsable value is an error rather
// than a silent fallback, since reproducible builds depend on it.
func RunTime() (time.Time, error) {
	s, ok := os.LookupEnv("SOURCE_DATE_EPOCH")
	if !ok || s == "" {
		return time.Now().UTC().Truncate(time.Second), nil
	}
	n, err := strconv.ParseInt(s, 10, 64)
	if err != nil {
		return time.Time{}, fmt.Errorf("SOURCE_DATE_EPOCH=%q is not a whole number of seconds", s)
	}
	return time.Unix(n, 0).UTC(), nil
}

// ProcessFile reads a data file and runs the pipeline on it. Errors name the
// file (and the line, for input problems).
func (p *Pipeline) ProcessFile(ctx context.Context, path string, at time.Time) (*Record, error) {
	f, err := os.Open(path)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	limit := p.Input.MaxBytes
	if st, err := f.Stat(); err == nil && st.Size() > limit {
		return nil, &input.Error{File: path, Msg: fmt.Sprintf("file is %d bytes, larger than the limit of %d bytes (raise max_mb in the input block if this is a real chromatogram)", st.Size(), limit)}
	}
	data, err := io.ReadAll(io.LimitReader(f, limit+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", path, err)
	}
	return p.Process(ctx, path, data, at)
}

// Process runs the pipeline on a data file held in memory; name is used in
// errors and (as its base name) in the record.
func (p *Pipeline) Process(ctx context.Context, name string, data []byte, at time.Time) (*Record, error) {
	sum := sha256.Sum256(data)
	d, err := input.Read(bytes.NewReader(data), name, p.Input)
	if err != nil {
		return nil, err
	}
	return p.analyse(ctx, name, hex.EncodeToString(sum[:]), d, at)
}

// analyse runs the steps and the limits on data already read.
func (p *Pipeline) analyse(ctx context.Context, name, digest string, d *input.Data, at time.Time) (*Record, error) {
	r := steps.NewRun(d.Trace, d.Meta)
	for _, st := range p.Steps {
		if err := ctx.Err(); err != nil {
			return nil, err
		}
		if err := st.Run(ctx, r); err != nil {
			return nil, fmt.Errorf("%s: %w", name, err)
		}
		r.Done = append(r.Done, st.Name())
	}
	results := checkLimits(p.Limits, r)
	rec := &Record{
		Schema: Schema,
		Provenance: Provenance{
			Tool: "lotgate", Version: Version,
			PipelineFile: p.File, PipelineSHA256: p.Digest, BundleSHA256: p.Bundle,
			InputFile: filepath.Base(name), InputSHA256: digest,
			ProcessedAt: at.UTC().Format(time.RFC3339),
		},
		Method:     p.method(),
		Units:      units(d.Trace.SignalUnit),
		Peaks:      buildPeaks(r),
		Components: buildComponents(r),
		Limits:     buildLimits(p.Limits, results),
		Verdict:    rules.Verdict(results),
		Warnings:   r.Warnings,
		Report:     p.Report,
		Trace:      traceOf(r),
	}
	for _, k := range d.MetaOrder {
		rec.Sample.Metadata = append(rec.Sample.Metadata, MetaRec{Key: k, Value: d.Meta[k]})
	}
	if n := r.Noise; n != nil {
		rec.Noise = &NoiseRec{SD: n.SD, PeakToPeak: n.PeakToPeak, Method: n.Method}
		if n.Method == "window" {
			rec.Noise.FromMin, rec.Noise.ToMin = &n.FromMin, &n.ToMin
		} else {
			rec.Noise.BlockMin = &n.BlockMin
		}
	}
	if q := r.Quant; q != nil {
		rec.Quant = &QuantRec{Method: q.Method, UnknownRRF: q.UnknownRRF, ReportingThreshold: q.ReportingThreshold, TotalArea: q.TotalArea}
		main := ""
		for _, c := range r.Components {
			if c.Main {
				main = c.Name
			}
		}
		t := totalsOf(r, main)
		rec.Totals = &t
	}
	return rec, nil
}

func units(signal string) Units {
	u := Units{Time: "min", Signal: signal, Area: signal + "·s"}
	if signal == "" {
		u.Area = "signal·s"
	}
	return u
}

func (p *Pipeline) method() Method {
	m := Method{Name: p.Name, Revision: p.Revision, Description: p.Description, Input: settingsMap(p.inputSettings)}
	for i, st := range p.Steps {
		m.Steps = append(m.Steps, StepRec{Step: st.Name(), Settings: settingsMap(p.stepSettings[i])})
	}
	return m
}

func traceOf(r *steps.Run) *TraceRec {
	tr := r.Trace
	t := &TraceRec{Points: len(tr.Time), StartMin: tr.Time[0], IntervalMin: tr.Interval(), Raw: tr.Signal}
	if r.Ran("smooth") {
		t.Processed = r.Processed
	}
	t.Baseline = r.Baseline
	return t
}

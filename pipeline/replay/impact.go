package replay

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strings"
	"time"

	"lotgate/pipeline"
	"lotgate/reports"
)

// Rerun processes the data file with p, as at the record's processing time
// and under the record's input file name, so that the new record differs
// from the old one only where the method or the arithmetic does. The bytes
// processed must be the record's raw data (their SHA-256 its input_sha256);
// other data is refused.
func Rerun(ctx context.Context, p *pipeline.Pipeline, old *pipeline.Record, dataPath string) (*pipeline.Record, error) {
	f, err := os.Open(dataPath)
	if err != nil {
		return nil, err
	}
	defer f.Close()
	data, err := io.ReadAll(io.LimitReader(f, p.Input.MaxBytes+1))
	if err != nil {
		return nil, fmt.Errorf("%s: %w", dataPath, err)
	}
	if int64(len(data)) > p.Input.MaxBytes {
		return nil, fmt.Errorf("%s is larger than the pipeline's limit of %d bytes (max_mb in its input block)", dataPath, p.Input.MaxBytes)
	}
	sum := sha256.Sum256(data)
	if err := checkDigest(dataPath, hex.EncodeToString(sum[:]), old); err != nil {
		return nil, err
	}
	at, err := time.Parse(time.RFC3339, old.Provenance.ProcessedAt)
	if err != nil {
		at = time.Unix(0, 0)
	}
	return p.Process(ctx, old.Provenance.InputFile, data, at)
}

// Assess summarises what the new record changes in the old one for the
// impact table: the verdicts, the limits whose reported value, bounds or
// status change, and flags for the rest (res is Compare's result for the
// two records).
func Assess(recordPath string, old, new *pipeline.Record, res Result) reports.ImpactRow {
	row := reports.ImpactRow{
		Record: filepath.Base(recordPath), Input: old.Provenance.InputFile,
		Lot: meta(old, "lot"), Sample: meta(old, "sample_id"),
		OldVerdict: old.Verdict, NewVerdict: new.Verdict,
	}
	newLimits := map[string]pipeline.LimitRec{}
	for _, l := range new.Limits {
		newLimits[l.Name] = l
	}
	seen := map[string]bool{}
	for _, o := range old.Limits {
		seen[o.Name] = true
		n, ok := newLimits[o.Name]
		c := reports.LimitChange{Name: o.Name, OldReported: o.Reported, OldLimit: bounds(o), OldStatus: o.Status}
		if ok {
			c.NewReported, c.NewLimit, c.NewStatus = n.Reported, bounds(n), n.Status
		}
		if !ok || c.OldReported != c.NewReported || c.OldLimit != c.NewLimit || c.OldStatus != c.NewStatus {
			row.Limits = append(row.Limits, c)
		}
	}
	for _, n := range new.Limits {
		if !seen[n.Name] {
			row.Limits = append(row.Limits, reports.LimitChange{Name: n.Name, NewReported: n.Reported, NewLimit: bounds(n), NewStatus: n.Status})
		}
	}
	if res.MaxRel > 0 {
		row.Flags = append(row.Flags, fmt.Sprintf("unrounded numbers change (largest relative difference %.3g, %s)", res.MaxRel, res.MaxRelField))
	}
	for _, d := range res.Diffs {
		if strings.HasPrefix(d.Field, "warnings") {
			row.Flags = append(row.Flags, "warnings change")
			break
		}
	}
	if v := old.Provenance.Version; v != pipeline.Version {
		row.Flags = append(row.Flags, fmt.Sprintf("record made by lotgate %s, re-run by %s", v, pipeline.Version))
	}
	return row
}

// Failed is the impact row of a record that could not be re-run; old is
// nil when the record itself could not be read.
func Failed(recordPath string, old *pipeline.Record, err error) reports.ImpactRow {
	row := reports.ImpactRow{Record: filepath.Base(recordPath), Error: strings.ReplaceAll(err.Error(), "\n", "; ")}
	if old != nil {
		row.Input, row.Lot, row.Sample, row.OldVerdict = old.Provenance.InputFile, meta(old, "lot"), meta(old, "sample_id"), old.Verdict
	}
	return row
}

// bounds writes a limit's bounds as the record holds them: "max 0.030",
// "min 99.80", or both.
func bounds(l pipeline.LimitRec) string {
	switch {
	case l.Min != "" && l.Max != "":
		return "min " + l.Min + ", max " + l.Max
	case l.Min != "":
		return "min " + l.Min
	case l.Max != "":
		return "max " + l.Max
	}
	return ""
}

// meta returns a metadata value of the record, or "".
func meta(rec *pipeline.Record, key string) string {
	for _, m := range rec.Sample.Metadata {
		if m.Key == key {
			return m.Value
		}
	}
	return ""
}

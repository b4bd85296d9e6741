package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"runtime"

	"lotgate/pipeline"
	"lotgate/pipeline/bundle"
	"lotgate/pipeline/replay"
	"lotgate/reports"
)

const replayHelp = `Usage: lotgate replay [--tolerance R] BUNDLE RECORD.json [DATAFILE]
       lotgate replay --with BUNDLE [--data DIR] [-o IMPACT.xlsx [--replace]] RECORD.json...

The first form re-runs a frozen pipeline on a record's raw data and compares
the new record with the old one: every peak, component, limit, total, the
noise, the trace and the verdict (not the processing time, the lotgate
version or the bundle digest, which are checked separately). The raw data is
DATAFILE, or the file next to the record (or in its input folder) whose
SHA-256 is the record's input_sha256; a data file with another digest is
refused. Same: says so and exits 0. Different: a table of the fields that
differ (field, old, new, relative difference) and exit status 1. Either way
it reports the largest relative difference of the unrounded numbers, and it
warns when the record was made by another lotgate version or another
pipeline. On the same platform a replay is identical bit for bit; numbers
whose relative difference is at most --tolerance count as equal.

The second form (--with) re-runs past records' raw data under another
pipeline version and summarises, one row per record, which verdicts and
which reported limit values would change; -o also writes the table as an
xlsx workbook. Exit status 1 when any verdict or limit result changes.

BUNDLE may also be a plain pipeline file.

Exit status: 0 same (no change); 1 different (something changes); 2 usage or
bundle error; 3 a record or its raw data could not be read, verified or
processed, or the workbook could not be written.

Flags:
`

func cmdReplay(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("replay", replayHelp, stdout)
	with := fs.String("with", "", "re-run the records under this pipeline version (bundle or pipeline file)")
	data := fs.String("data", "", "with --with: folder holding the raw data files (default: next to each record)")
	var out string
	fs.StringVar(&out, "o", "", "with --with: write the impact workbook (.xlsx) here")
	fs.StringVar(&out, "out", "", "same as -o")
	replace := fs.Bool("replace", false, "overwrite an existing workbook whose content differs")
	tol := fs.Float64("tolerance", 0, "relative difference up to which two numbers count as equal (0: bit for bit)")
	pos, err := parse(fs, args)
	if err != nil {
		return usageError(stderr, "replay", err)
	}
	if *tol < 0 || *tol != *tol {
		return usageError(stderr, "replay", fmt.Errorf("--tolerance must be a number of at least 0, not %v", *tol))
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	if *with != "" {
		switch {
		case len(pos) == 0:
			return usageError(stderr, "replay", errors.New("--with needs the records to re-run"))
		case *tol != 0:
			return usageError(stderr, "replay", errors.New("--tolerance applies to a single replay, not to --with"))
		}
		return replayWith(ctx, *with, *data, out, *replace, pos, stdout, stderr)
	}
	switch {
	case *data != "" || out != "":
		return usageError(stderr, "replay", errors.New("--data and -o go with --with"))
	case len(pos) < 2 || len(pos) > 3:
		return usageError(stderr, "replay", errors.New("give BUNDLE RECORD.json and optionally the DATAFILE"))
	}
	return replayOne(ctx, pos, *tol, stdout, stderr)
}

func replayOne(ctx context.Context, pos []string, tol float64, stdout, stderr io.Writer) int {
	b, err := bundle.OpenAny(pos[0])
	if err != nil {
		fmt.Fprintln(stderr, describe(err))
		return exitUsage
	}
	recPath := pos[1]
	old, err := replay.ReadRecord(recPath)
	if err != nil {
		fmt.Fprintf(stderr, "lotgate replay: %v\n", err)
		return exitFileFail
	}
	var dataPath string
	if len(pos) == 3 {
		dataPath = pos[2]
	} else if dataPath, err = (&replay.Finder{}).Find(recPath, old); err != nil {
		fmt.Fprintf(stderr, "lotgate replay: %v\n", err)
		return exitFileFail
	}
	warnProvenance(stderr, b, old)
	fmt.Fprintf(stdout, "replaying %s on %s (sha256 %s)\nwith %s\non %s/%s, %s\n\n", recPath, dataPath, old.Provenance.InputSHA256,
		describeBundle(b), runtime.GOOS, runtime.GOARCH, runtime.Version())
	rec, err := replay.Rerun(ctx, b.Pipeline, old, dataPath)
	if err != nil {
		fmt.Fprintf(stderr, "lotgate replay: %v\n", oneLine(err))
		return exitFileFail
	}
	res, err := replay.Compare(old, rec, tol)
	if err != nil {
		fmt.Fprintf(stderr, "lotgate replay: %v\n", err)
		return exitFileFail
	}
	largest := "0 (equal bit for bit)"
	if res.MaxRel > 0 {
		largest = fmt.Sprintf("%.3g (%s)", res.MaxRel, res.MaxRelField)
	}
	if res.Same() {
		same := "identical"
		if res.MaxRel > 0 {
			same = fmt.Sprintf("the same within the relative tolerance %g", tol)
		}
		fmt.Fprintf(stdout, "%s: every peak, component, limit, total and the verdict (%s) are the same as in the record\nlargest relative difference of the unrounded numbers: %s\n", same, rec.Verdict, largest)
		return exitOK
	}
	verdict := "the verdict is the same (" + rec.Verdict + ")"
	if old.Verdict != rec.Verdict {
		verdict = "the verdict changes from " + old.Verdict + " to " + rec.Verdict
	}
	fmt.Fprintf(stdout, "DIFFERENT: %d fields differ from the record; %s\n\n", len(res.Diffs), verdict)
	if err := replay.WriteDiffs(stdout, res); err != nil {
		fmt.Fprintf(stderr, "lotgate replay: %v\n", err)
		return exitFileFail
	}
	fmt.Fprintf(stdout, "\nlargest relative difference of the unrounded numbers: %s\n", largest)
	return exitVerdict
}

// describeBundle names the pipeline version a replay runs.
func describeBundle(b *bundle.Bundle) string {
	m := b.Manifest
	s := fmt.Sprintf("pipeline %q revision %d", m.Pipeline.Name, m.Pipeline.Revision)
	if b.Digest == "" {
		return s + " from the plain file " + m.Pipeline.File + " (sha256 " + b.Pipeline.Digest + ")"
	}
	return s + fmt.Sprintf(", bundle sha256 %s (frozen %s by lotgate %s)", b.Digest, m.FrozenAt, m.LotgateVersion)
}

// warnProvenance warns when the record was not made by this lotgate version,
// by this bundle or by this pipeline file.
func warnProvenance(stderr io.Writer, b *bundle.Bundle, old *pipeline.Record) {
	pr := old.Provenance
	if pr.Version != pipeline.Version {
		fmt.Fprintf(stderr, "lotgate replay: warning: the record was made by lotgate %s, this is lotgate %s; numbers may differ where the processing changed between versions\n", pr.Version, pipeline.Version)
	}
	if pr.BundleSHA256 != "" && pr.BundleSHA256 != b.Digest {
		fmt.Fprintf(stderr, "lotgate replay: warning: the record names bundle sha256 %s, not this one\n", pr.BundleSHA256)
	}
	if pr.PipelineSHA256 != b.Pipeline.Digest {
		fmt.Fprintf(stderr, "lotgate replay: warning: the record was made by pipeline %s with sha256 %s (%s revision %d); this one is %s with sha256 %s (revision %d)\n",
			pr.PipelineFile, pr.PipelineSHA256, old.Method.Name, old.Method.Revision, b.Pipeline.File, b.Pipeline.Digest, b.Pipeline.Revision)
	}
}

func replayWith(ctx context.Context, with, dataDir, out string, replace bool, records []string, stdout, stderr io.Writer) int {
	b, err := bundle.OpenAny(with)
	if err != nil {
		fmt.Fprintln(stderr, describe(err))
		return exitUsage
	}
	at, err := pipeline.RunTime()
	if err != nil {
		return usageError(stderr, "replay", err)
	}
	finder := &replay.Finder{}
	if dataDir != "" {
		finder.Dirs = []string{dataDir}
	}
	m := b.Manifest
	imp := &reports.Impact{Pipeline: fmt.Sprintf("%q revision %d", m.Pipeline.Name, m.Pipeline.Revision), Bundle: b.Digest}
	for _, path := range records {
		imp.Rows = append(imp.Rows, impactOf(ctx, b.Pipeline, finder, path))
	}
	fmt.Fprintf(stdout, "impact of %s on %d records\n\n", describeBundle(b), len(records))
	if err := replay.WriteImpact(stdout, imp); err != nil {
		fmt.Fprintf(stderr, "lotgate replay: %v\n", err)
		return exitFileFail
	}
	status := exitOK
	verdicts, limits, failed := imp.Counts()
	if verdicts+limits > 0 {
		status = exitVerdict
	}
	if failed > 0 {
		status = exitFileFail
	}
	if out != "" {
		wb, err := reports.ImpactWorkbook(imp, at)
		if err == nil {
			_, err = reports.WriteAtomic(out, wb, replace)
		}
		if err != nil {
			fmt.Fprintf(stderr, "lotgate replay: %v\n", err)
			return exitFileFail
		}
		fmt.Fprintf(stdout, "workbook: %s\n", out)
	}
	return status
}

// impactOf re-runs one record under p; a record that cannot be re-run is a
// row with its error.
func impactOf(ctx context.Context, p *pipeline.Pipeline, finder *replay.Finder, path string) reports.ImpactRow {
	old, err := replay.ReadRecord(path)
	if err != nil {
		return replay.Failed(path, nil, err)
	}
	data, err := finder.Find(path, old)
	var rec *pipeline.Record
	if err == nil {
		rec, err = replay.Rerun(ctx, p, old, data)
	}
	var res replay.Result
	if err == nil {
		res, err = replay.Compare(old, rec, 0)
	}
	if err != nil {
		return replay.Failed(path, old, err)
	}
	return replay.Assess(path, old, rec, res)
}

package main

import (
	"context"
	"errors"
	"fmt"
	"io"
	"os"
	"os/signal"
	"path/filepath"
	"runtime"
	"strings"
	"sync"
	"time"

	"lotgate/pipeline"
	"lotgate/pipeline/bundle"
	"lotgate/reports"
)

const runHelp = `Usage: lotgate run -p PIPELINE -o OUTDIR [--replace] [--workers N] FILE...

Processes each data file through the pipeline and writes OUTDIR/<file name>.json
(the extension replaced). Prints one line per file: the file, its verdict and
the limits it failed. A file that cannot be processed is reported and skipped;
the others are still processed. An existing record with other content is not
overwritten unless --replace is given.

Exit status: 0 all passed; 1 processed, some verdict fail or undetermined;
2 usage or pipeline error; 3 some file could not be processed or written.

Flags:
`

// outcome is what happened to one input file.
type outcome struct {
	file    string
	rec     *pipeline.Record
	outputs []reports.Output
	err     error
}

func cmdRun(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("run", runHelp, stdout)
	pipeFlag := pipelineFlag(fs)
	outFlag := stringFlag(fs, "o", "out", "output folder for records (created if missing)")
	replace := fs.Bool("replace", false, "overwrite existing records whose content differs")
	workers := fs.Int("workers", runtime.GOMAXPROCS(0), "files processed at once")
	files, err := parse(fs, args)
	if err != nil {
		return usageError(stderr, "run", err)
	}
	pipe, out := *pipeFlag, *outFlag
	switch {
	case pipe == "":
		return usageError(stderr, "run", errors.New("no pipeline: give -p PIPELINE"))
	case out == "":
		return usageError(stderr, "run", errors.New("no output folder: give -o OUTDIR"))
	case len(files) == 0:
		return usageError(stderr, "run", errors.New("no data files given"))
	case *workers < 1:
		return usageError(stderr, "run", fmt.Errorf("--workers must be at least 1, not %d", *workers))
	}
	p, err := loadPipeline(pipe)
	if err != nil {
		fmt.Fprintln(stderr, describe(err))
		return exitUsage
	}
	if err := os.MkdirAll(out, 0o755); err != nil {
		fmt.Fprintf(stderr, "lotgate run: %v\n", err)
		return exitUsage
	}
	if dup := duplicateNames(files); dup != "" {
		return usageError(stderr, "run", errors.New(dup))
	}
	at, err := pipeline.RunTime()
	if err != nil {
		return usageError(stderr, "run", err)
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	results := processAll(ctx, p, files, out, *replace, *workers, at)
	return report(results, stdout, stderr)
}

// processAll runs the files on a pool of workers; results keep input order.
func processAll(ctx context.Context, p *pipeline.Pipeline, files []string, out string, replace bool, workers int, at time.Time) []outcome {
	results := make([]outcome, len(files))
	jobs := make(chan int)
	var wg sync.WaitGroup
	for range min(workers, len(files)) {
		wg.Go(func() {
			for i := range jobs {
				results[i] = processOne(ctx, p, files[i], out, replace, at)
			}
		})
	}
	for i := range files {
		jobs <- i
	}
	close(jobs)
	wg.Wait()
	return results
}

func processOne(ctx context.Context, p *pipeline.Pipeline, file, out string, replace bool, at time.Time) outcome {
	o := outcome{file: file}
	o.rec, o.err = p.ProcessFile(ctx, file, at)
	if o.err == nil {
		o.outputs, o.err = reports.WriteAll(out, reports.Stem(file), o.rec, p.Logo, replace)
	}
	return o
}

// report prints one line per file and returns the exit status.
func report(results []outcome, stdout, stderr io.Writer) int {
	status := exitOK
	for _, o := range results {
		if o.err != nil {
			msg := oneLine(o.err)
			if !strings.HasPrefix(msg, o.file) {
				msg = o.file + ": " + msg
			}
			fmt.Fprintf(stderr, "error: %s\n", msg)
			status = exitFileFail
			continue
		}
		note := ""
		if !o.outputs[0].Changed {
			note = " (unchanged)"
		}
		fmt.Fprintf(stdout, "%-22s %-12s %s%s%s\n", filepath.Base(o.file), verdictWord(o.rec.Verdict), failures(o.rec), paths(o.outputs), note)
		if o.rec.Verdict != "pass" && status == exitOK {
			status = exitVerdict
		}
	}
	return status
}

func verdictWord(v string) string {
	if v == "pass" {
		return "pass"
	}
	return strings.ToUpper(v)
}

// failures lists the limits that did not pass, ready to print before the path.
func failures(rec *pipeline.Record) string {
	var parts []string
	for _, l := range rec.Limits {
		if l.Status != "pass" {
			parts = append(parts, fmt.Sprintf("%s: %s", l.Name, l.Reason))
		}
	}
	if len(parts) == 0 {
		return "→ "
	}
	return strings.Join(parts, "; ") + " → "
}

// paths lists the documents written: the record's path, then the other
// formats' extensions.
func paths(outs []reports.Output) string {
	s := outs[0].Path
	for _, o := range outs[1:] {
		s += " +" + filepath.Ext(o.Path)
	}
	return s
}

// loadPipeline loads the pipeline every command works with.
func loadPipeline(path string) (*pipeline.Pipeline, error) { return bundle.Load(path) }

func oneLine(err error) string { return strings.ReplaceAll(err.Error(), "\n", "; ") }

// describe turns a pipeline load error into the text shown to the user.
func describe(err error) string {
	var pe *pipeline.Error
	if errors.As(err, &pe) {
		return strings.TrimRight(pe.Pretty(), "\n")
	}
	return err.Error()
}

// duplicateNames reports two inputs that would write the same record name.
func duplicateNames(files []string) string {
	seen := map[string]string{}
	for _, f := range files {
		n := reports.Stem(f)
		if prev, ok := seen[n]; ok {
			return fmt.Sprintf("%s and %s would both be written as %s.*; process them into different folders", prev, f, n)
		}
		seen[n] = f
	}
	return ""
}

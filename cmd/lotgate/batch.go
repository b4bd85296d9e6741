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
	"slices"
	"strings"
	"sync"
	"time"

	"lotgate/examples"
	seqgen "lotgate/examples/synth"
	"lotgate/pipeline"
	"lotgate/pipeline/batch"
	"lotgate/reports"
)

const batchHelp = `Usage: lotgate batch -p PIPELINE -o OUTDIR [--replace] [--workers N] [--progress MODE] SEQUENCE

Processes every injection of a sequence file (blanks, calibration standards,
suitability injections, check standards and sample replicates) through the
pipeline, then evaluates the sequence: fits the calibration, checks the
system-suitability gates, reads the calibrated amounts, combines the
replicates and decides each lot: released, rejected, invalid run or
undetermined.

Writes OUTDIR/<data file name>.json for every injection (with the amounts
and the injection's status), the pipeline's other documents (workbook,
certificate) for sample injections — never a certificate for an injection
whose run is invalid — and, for each lot, OUTDIR/lot-LOT.json (the lot
record), lot-LOT.xlsx and lot-LOT.pdf (the lot summary, which is the lot's
certificate when it is released). Progress goes to the standard error: a bar
on a terminal, plain lines otherwise. An existing file with other content is
not overwritten unless --replace is given.

Exit status: 0 every lot released; 1 processed, some lot not released (or no
lot in the sequence); 2 usage, pipeline or sequence error; 3 some injection
could not be processed or some document not written.

Flags:
`

func cmdBatch(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("batch", batchHelp, stdout)
	pipeFlag := pipelineFlag(fs)
	outFlag := stringFlag(fs, "o", "out", "output folder (created if missing)")
	replace := fs.Bool("replace", false, "overwrite existing documents whose content differs")
	workers := fs.Int("workers", runtime.GOMAXPROCS(0), "injections processed at once")
	mode := fs.String("progress", "auto", "progress display: auto (a bar on a terminal), bar, lines or none")
	pos, err := parse(fs, args)
	if err != nil {
		return usageError(stderr, "batch", err)
	}
	pipe, out := *pipeFlag, *outFlag
	switch {
	case pipe == "":
		return usageError(stderr, "batch", errors.New("no pipeline: give -p PIPELINE"))
	case out == "":
		return usageError(stderr, "batch", errors.New("no output folder: give -o OUTDIR"))
	case len(pos) != 1:
		return usageError(stderr, "batch", errors.New("give one sequence file"))
	case *workers < 1:
		return usageError(stderr, "batch", fmt.Errorf("--workers must be at least 1, not %d", *workers))
	case !slices.Contains([]string{"auto", "bar", "lines", "none"}, *mode):
		return usageError(stderr, "batch", fmt.Errorf("--progress is auto, bar, lines or none, not %q", *mode))
	}
	p, err := loadPipeline(pipe)
	if err != nil {
		fmt.Fprintln(stderr, describe(err))
		return exitUsage
	}
	seq, err := batch.Load(pos[0])
	if err != nil {
		fmt.Fprintln(stderr, describe(err))
		return exitUsage
	}
	if err := os.MkdirAll(out, 0o755); err != nil {
		fmt.Fprintf(stderr, "lotgate batch: %v\n", err)
		return exitUsage
	}
	at, err := pipeline.RunTime()
	if err != nil {
		return usageError(stderr, "batch", err)
	}
	ctx, stop := signal.NotifyContext(context.Background(), os.Interrupt)
	defer stop()
	job := batchJob{p: p, seq: seq, out: out, replace: *replace, workers: *workers, at: at,
		progress: newProgress(stderr, *mode)}
	return job.run(ctx, stdout, stderr)
}

// batchJob is one sequence to process and write.
type batchJob struct {
	p        *pipeline.Pipeline
	seq      *batch.Sequence
	out      string
	replace  bool
	workers  int
	at       time.Time
	progress *progress
}

// written is what happened to one document set.
type written struct {
	name    string
	outputs []reports.Output
	err     error
}

// run processes the sequence, writes its documents, prints the lot
// verdicts and returns the exit status.
func (j batchJob) run(ctx context.Context, stdout, stderr io.Writer) int {
	if err := j.checkNames(); err != nil {
		fmt.Fprintf(stderr, "lotgate batch: %v\n", err)
		return exitUsage
	}
	res, err := batch.Run(ctx, j.p, j.seq, batch.Options{Workers: j.workers, At: j.at,
		Progress: func(done, total int, inj *batch.Injection, err error) {
			j.progress.step("processing", done, total, filepath.Base(inj.File), err)
		}})
	j.progress.end()
	if err != nil {
		if errors.Is(err, context.Canceled) {
			fmt.Fprintln(stderr, "lotgate batch: interrupted; nothing was written")
			return exitFileFail
		}
		fmt.Fprintln(stderr, describe(err))
		return exitUsage
	}
	docs := j.write(res)
	j.progress.end()
	return reportBatch(res, docs, stdout, stderr)
}

// checkNames refuses a lot whose documents would have an injection's name.
func (j batchJob) checkNames() error {
	stems := map[string]string{}
	for _, inj := range j.seq.Injections {
		stems[reports.Stem(inj.File)] = inj.File
	}
	for _, inj := range j.seq.Injections {
		if inj.Role == batch.RoleSample {
			if f, ok := stems[batch.LotStem(inj.Lot)]; ok {
				return fmt.Errorf("data file %s would be written under the name of lot %s's documents (%s.*); rename it",
					f, inj.Lot, batch.LotStem(inj.Lot))
			}
		}
	}
	return nil
}

// write writes every injection's documents and every lot's, on the
// workers; the results keep the sequence order, lots last.
func (j batchJob) write(res *batch.Result) []written {
	type task struct {
		o   *batch.Outcome
		lot *batch.Lot
	}
	var tasks []task
	for _, o := range res.Outcomes {
		if o.Record != nil {
			tasks = append(tasks, task{o: o})
		}
	}
	for _, l := range res.Lots {
		tasks = append(tasks, task{lot: l})
	}
	docs := make([]written, len(tasks))
	jobs := make(chan int)
	var mu sync.Mutex
	done := 0
	var wg sync.WaitGroup
	for range min(j.workers, len(tasks)) {
		wg.Go(func() {
			for i := range jobs {
				t := tasks[i]
				var w written
				if t.lot != nil {
					w.name = batch.LotStem(t.lot.Lot)
					w.outputs, w.err = reports.WriteLot(j.out, t.lot, j.p.Logo, j.replace)
				} else {
					w.name = filepath.Base(t.o.File)
					w.outputs, w.err = j.writeInjection(t.o)
				}
				docs[i] = w
				mu.Lock()
				done++
				j.progress.step("writing", done, len(tasks), w.name, w.err)
				mu.Unlock()
			}
		})
	}
	for i := range tasks {
		jobs <- i
	}
	close(jobs)
	wg.Wait()
	return docs
}

// writeInjection writes an injection's record and, for a sample, the
// pipeline's other documents; an injection whose run is invalid gets no
// certificate, and one left from an earlier run is removed (with --replace)
// or refused.
func (j batchJob) writeInjection(o *batch.Outcome) ([]reports.Output, error) {
	stem := reports.Stem(o.File)
	formats := []string{"json"}
	if o.Role == batch.RoleSample {
		for _, f := range o.Record.Report.Formats {
			if f != "json" && (f != "pdf" || o.Status != batch.StatusInvalid) {
				formats = append(formats, f)
			}
		}
	}
	datas, err := reports.RenderAll(o.Record, j.p.Logo, formats)
	if err != nil {
		return nil, err
	}
	var outs []reports.Output
	for i, f := range formats {
		path := filepath.Join(j.out, stem+"."+f)
		changed, err := reports.WriteAtomic(path, datas[i], j.replace)
		if err != nil {
			return outs, err
		}
		outs = append(outs, reports.Output{Format: f, Path: path, Changed: changed})
	}
	if o.Status == batch.StatusInvalid {
		stale := filepath.Join(j.out, stem+".pdf")
		if _, err := os.Stat(stale); err == nil {
			if !j.replace {
				return outs, fmt.Errorf("%s is a certificate from an earlier run, but the run is now invalid (use --replace to remove it)", stale)
			}
			if err := os.Remove(stale); err != nil {
				return outs, err
			}
		}
	}
	return outs, nil
}

// reportBatch prints the injections that are not valid and each lot's
// verdict, and returns the exit status.
func reportBatch(res *batch.Result, docs []written, stdout, stderr io.Writer) int {
	status := exitOK
	seq := res.Sequence
	counts := map[string]int{}
	for _, o := range res.Outcomes {
		counts[o.Status]++
	}
	fmt.Fprintf(stdout, "sequence %s: %s", seq.Name, plural(len(res.Outcomes), "injection"))
	for _, s := range []string{batch.StatusValid, batch.StatusInvalid, batch.StatusFailed, batch.StatusError} {
		if counts[s] > 0 {
			fmt.Fprintf(stdout, ", %d %s", counts[s], s)
		}
	}
	fmt.Fprintln(stdout)
	// Injections that are not valid, consecutive ones with the same
	// status and reasons on one line.
	outs := res.Outcomes
	for i := 0; i < len(outs); {
		o := outs[i]
		k := i + 1
		for k < len(outs) && outs[k].Status == o.Status && slices.Equal(outs[k].Reasons, o.Reasons) {
			k++
		}
		switch o.Status {
		case batch.StatusValid:
		case batch.StatusError:
			for _, e := range outs[i:k] {
				fmt.Fprintf(stderr, "%s: error: %s\n", e.File, strings.Join(e.Reasons, "; "))
			}
			status = exitFileFail
		default:
			fmt.Fprintf(stdout, "  %s: %s: %s\n", describeRun(outs[i:k]), o.Status, strings.Join(o.Reasons, "; "))
		}
		i = k
	}
	lotDocs := map[string]written{}
	for _, d := range docs {
		if d.err != nil {
			fmt.Fprintf(stderr, "%s: error: %s\n", d.name, oneLine(d.err))
			status = exitFileFail
		}
		lotDocs[d.name] = d
	}
	if len(res.Lots) == 0 {
		fmt.Fprintln(stdout, "the sequence has no sample injection: no lot to release")
		if status == exitOK {
			status = exitVerdict
		}
	}
	for _, l := range res.Lots {
		reasons := ""
		if len(l.Reasons) > 0 {
			reasons = strings.Join(l.Reasons, "; ") + " "
		}
		where := ""
		if d := lotDocs[batch.LotStem(l.Lot)]; d.err == nil && len(d.outputs) > 0 {
			where = "→ " + paths(d.outputs)
		}
		fmt.Fprintf(stdout, "lot %-16s %-13s %s%s\n", l.Lot, strings.ToUpper(l.Verdict), reasons, where)
		if l.Verdict != batch.Released && status == exitOK {
			status = exitVerdict
		}
	}
	return status
}

// describeRun names a run of consecutive injections: "injection 18 (check
// CAL-3)" or "injections 12–17 (sample T998-26-1151-A/1 … T998-26-1151-B/3)".
func describeRun(os []*batch.Outcome) string {
	what := func(o *batch.Outcome) string {
		s := o.Role
		if o.Standard != nil {
			s += " " + o.Standard.Name
		}
		if o.Sample != "" {
			s += fmt.Sprintf(" %s/%d", o.Sample, o.Replicate)
		}
		return s
	}
	first, last := os[0], os[len(os)-1]
	if len(os) == 1 {
		return fmt.Sprintf("injection %d (%s)", first.Number, what(first))
	}
	return fmt.Sprintf("injections %d–%d (%s … %s)", first.Number, last.Number, what(first), what(last))
}

func plural(n int, noun string) string {
	if n == 1 {
		return "1 " + noun
	}
	return fmt.Sprintf("%d %ss", n, noun)
}

// progress shows how far a batch has come on the standard error: a bar
// redrawn in place on a terminal, or one plain line per step.
type progress struct {
	w     io.Writer
	bar   bool
	off   bool
	shown bool // a bar is on the line
}

// newProgress chooses the display for a mode: auto is a bar when w is a
// terminal and lines otherwise.
func newProgress(w io.Writer, mode string) *progress {
	p := &progress{w: w}
	switch mode {
	case "none":
		p.off = true
	case "bar":
		p.bar = true
	case "auto":
		p.bar = isTerminal(w)
	}
	return p
}

// isTerminal reports whether w is a character device (a terminal).
func isTerminal(w io.Writer) bool {
	f, ok := w.(*os.File)
	if !ok {
		return false
	}
	st, err := f.Stat()
	return err == nil && st.Mode()&os.ModeCharDevice != 0
}

// step shows that done of total steps of a phase are finished, the last
// being name (which failed when err is not nil). Calls must not overlap.
func (p *progress) step(phase string, done, total int, name string, err error) {
	if p == nil || p.off {
		return
	}
	if !p.bar {
		line := fmt.Sprintf("%s %d/%d %s", phase, done, total, name)
		if err != nil {
			line += ": error: " + oneLine(err)
		}
		fmt.Fprintln(p.w, line)
		return
	}
	const width = 30
	filled := width * done / max(total, 1)
	if r := []rune(name); len(r) > 28 {
		name = string(r[:27]) + "…"
	}
	fmt.Fprintf(p.w, "\r%-10s [%s%s] %3d/%-3d %-28s", phase, strings.Repeat("#", filled), strings.Repeat(".", width-filled), done, total, name)
	p.shown = true
}

// end finishes a bar's line.
func (p *progress) end() {
	if p != nil && p.shown {
		fmt.Fprintln(p.w)
		p.shown = false
	}
}

// demoSequences runs the demo's two night sequences: it writes the
// sequence pipeline into inDir (beside the logo the demo copied there),
// generates each sequence's files into inDir/NAME and processes it into
// out/NAME, and prints each lot's verdict. It returns the exit status of
// the demo: 0 unless something could not be written or processed.
func demoSequences(out, inDir string, stdout, stderr io.Writer) int {
	pipePath := filepath.Join(inDir, examples.NightPipelineFile)
	if _, err := reports.WriteAtomic(pipePath, examples.NightPipeline, true); err != nil {
		fmt.Fprintf(stderr, "lotgate demo: %v\n", err)
		return exitFileFail
	}
	p, err := loadPipeline(pipePath)
	if err != nil {
		fmt.Fprintln(stderr, describe(err))
		return exitUsage
	}
	at, err := pipeline.RunTime()
	if err != nil {
		return usageError(stderr, "demo", err)
	}
	fmt.Fprintf(stdout, "\nNight sequences: pipeline %q revision %d (%s)\n", p.Name, p.Revision, p.Description)
	var first string
	for _, s := range seqgen.NightSequences() {
		dir := filepath.Join(inDir, s.Name)
		if err := os.MkdirAll(dir, 0o755); err != nil {
			fmt.Fprintf(stderr, "lotgate demo: %v\n", err)
			return exitFileFail
		}
		for _, f := range s.Files {
			if _, err := reports.WriteAtomic(filepath.Join(dir, f.Name), f.Data, true); err != nil {
				fmt.Fprintf(stderr, "lotgate demo: %v\n", err)
				return exitFileFail
			}
		}
		seqPath := filepath.Join(dir, s.SequenceFile)
		if first == "" {
			first = seqPath
		}
		seq, err := batch.Load(seqPath)
		if err != nil {
			fmt.Fprintln(stderr, describe(err))
			return exitUsage
		}
		dst := filepath.Join(out, s.Name)
		if err := os.MkdirAll(dst, 0o755); err != nil {
			fmt.Fprintf(stderr, "lotgate demo: %v\n", err)
			return exitFileFail
		}
		fmt.Fprintf(stdout, "\n%s: inputs in %s\n", s.Name, dir)
		job := batchJob{p: p, seq: seq, out: dst, replace: true, workers: 2, at: at}
		if code := job.run(context.Background(), stdout, stderr); code == exitFileFail || code == exitUsage {
			return code
		}
	}
	fmt.Fprintf(stdout, "\nTry: lotgate batch -p %s -o OUTDIR %s\n", pipePath, first)
	return exitOK
}

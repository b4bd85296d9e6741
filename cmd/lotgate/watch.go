package main

import (
	"context"
	"errors"
	"flag"
	"fmt"
	"io"
	"log/slog"
	"os"
	"os/signal"
	"runtime"
	"strconv"
	"strings"
	"sync/atomic"
	"syscall"
	"time"

	"lotgate/pipeline/watch"
)

const watchHelp = `Usage: lotgate watch -p PIPELINE --inbox DIR -o OUTDIR [flags]

Processes every data file dropped into the inbox, exactly once, and keeps a
tamper-evident ledger of it in OUTDIR/ledger.jsonl.

A file is taken when its size and modification time have not changed over
--settle, it can be opened, and it is not empty and ends with a line end (a
file that still looks unfinished waits up to --incomplete-after). Hidden
names (".x"), names starting or ending with "~", and temporary endings
(.tmp, .temp, .part, .partial, .crdownload, .download, .filepart, .swp) are
left alone until renamed. Files are found from file-system events and by a
full listing of the inbox at start, every --rescan, and whenever events were
lost; --poll uses listings only (for network shares).

Folders (the work, archive and quarantine folders must be on the inbox's
file system; each move is an atomic rename):
  OUTDIR              documents (NAME-INPUTSHA-PIPELINESHA.json, ...),
                      ledger.jsonl, watch.lock (one watcher per folder)
  OUTDIR/work         files claimed and being processed
  OUTDIR/archive      processed inputs and duplicates, as ITEM-NAME; kept
  OUTDIR/quarantine   files that cannot be processed, with ITEM-NAME.reason.txt

The pipeline is loaded once; an edit to it while watching is reported in
the log and the ledger, not used. The first SIGINT or SIGTERM stops taking
files and lets those in flight finish (at most --stop-timeout); a second
stops at once. Either way the ledger tells what was done, and whatever was
left unfinished is finished at the next start.
Check a ledger with: lotgate ledger verify OUTDIR

Exit status: 0 stopped with nothing unfinished; 2 usage or pipeline error,
or refused to start (ledger damaged, folder locked); 3 stopped with files
unfinished or the ledger could not be written.

Flags:
`

func cmdWatch(args []string, stdout, stderr io.Writer) int {
	fs := newFlags("watch", watchHelp, stdout)
	var opt watch.Options
	pipeFlag := pipelineFlag(fs)
	fs.StringVar(&opt.Inbox, "inbox", "", "the drop folder (must exist)")
	outFlag := stringFlag(fs, "o", "out", "output folder: documents, ledger, lock (created if missing)")
	fs.StringVar(&opt.Work, "work", "", "work folder (default OUTDIR/work)")
	fs.StringVar(&opt.Archive, "archive", "", "archive folder (default OUTDIR/archive)")
	fs.StringVar(&opt.Quarantine, "quarantine", "", "quarantine folder (default OUTDIR/quarantine)")
	fs.IntVar(&opt.Workers, "workers", runtime.GOMAXPROCS(0), "files processed at once")
	fs.DurationVar(&opt.Settle, "settle", 3*time.Second, "how long a file must stay unchanged before it is taken")
	fs.DurationVar(&opt.Rescan, "rescan", 30*time.Second, "interval of full inbox listings (2s with --poll unless given)")
	fs.BoolVar(&opt.Poll, "poll", false, "find files by listing only, without file-system events (network shares)")
	fs.DurationVar(&opt.IncompleteAfter, "incomplete-after", time.Minute, "how long a settled file that looks unfinished waits before it is taken anyway")
	fs.DurationVar(&opt.StopTimeout, "stop-timeout", 30*time.Second, "how long a graceful stop waits for files in flight")
	fs.BoolVar(&opt.UntilIdle, "until-idle", false, "stop once the inbox is empty and nothing is in flight")
	logFormat := fs.String("log-format", "text", "log format on stderr: text or json")
	verbose := fs.Bool("v", false, "log every ledger entry (debug level)")
	rest, err := parse(fs, args)
	if err != nil {
		return usageError(stderr, "watch", err)
	}
	pipe, out := *pipeFlag, *outFlag
	rescanGiven := false
	fs.Visit(func(f *flag.Flag) { rescanGiven = rescanGiven || f.Name == "rescan" })
	switch {
	case len(rest) > 0:
		return usageError(stderr, "watch", fmt.Errorf("unexpected argument %q: files are dropped into the inbox", rest[0]))
	case pipe == "":
		return usageError(stderr, "watch", errors.New("no pipeline: give -p PIPELINE"))
	case opt.Inbox == "":
		return usageError(stderr, "watch", errors.New("no inbox: give --inbox DIR"))
	case out == "":
		return usageError(stderr, "watch", errors.New("no output folder: give -o OUTDIR"))
	case opt.Workers < 1:
		return usageError(stderr, "watch", fmt.Errorf("--workers must be at least 1, not %d", opt.Workers))
	case opt.Settle <= 0 || opt.Rescan <= 0 || opt.IncompleteAfter <= 0 || opt.StopTimeout <= 0:
		return usageError(stderr, "watch", errors.New("--settle, --rescan, --incomplete-after and --stop-timeout must be positive"))
	case *logFormat != "text" && *logFormat != "json":
		return usageError(stderr, "watch", fmt.Errorf("--log-format is text or json, not %q", *logFormat))
	}
	if opt.Poll && !rescanGiven {
		opt.Rescan = 2 * time.Second
	}
	level := slog.LevelInfo
	if *verbose {
		level = slog.LevelDebug
	}
	hopt := &slog.HandlerOptions{Level: level}
	opt.Logger = slog.New(slog.NewTextHandler(stderr, hopt))
	if *logFormat == "json" {
		opt.Logger = slog.New(slog.NewJSONHandler(stderr, hopt))
	}
	p, err := loadPipeline(pipe)
	if err != nil {
		fmt.Fprintln(stderr, describe(err))
		return exitUsage
	}
	opt.Pipeline, opt.PipelinePath, opt.Out = p, pipe, out
	if opt.AfterAppend, err = crashHook(os.Getenv("LOTGATE_WATCH_CRASH_AFTER")); err != nil {
		return usageError(stderr, "watch", err)
	}
	w, err := watch.New(opt)
	if err != nil {
		fmt.Fprintf(stderr, "lotgate watch: %v\n", err)
		return exitUsage
	}
	defer w.Close()

	ctx, stop := context.WithCancel(context.Background())
	defer stop()
	sigs := make(chan os.Signal, 2)
	signal.Notify(sigs, os.Interrupt, syscall.SIGTERM) // kept to the end: a late second signal still exits cleanly
	go func() {
		s := <-sigs
		opt.Logger.Info("signal: stopping once the files in flight are finished; a second signal stops at once", "signal", s.String())
		stop()
		s = <-sigs
		opt.Logger.Warn("second signal: stopping at once; unfinished files are finished at the next start", "signal", s.String())
		os.Exit(exitFileFail)
	}()
	sum, err := w.Run(ctx)
	fmt.Fprintf(stdout, "lotgate watch: stopped; this session: %d certified (%d pass, %d fail or undetermined), %d quarantined, %d duplicates, %d withdrawn, %d lost; %d unfinished; files found by listing %d, by event %d; ledger head %s\n",
		sum.Certified, sum.Passed, sum.Certified-sum.Passed, sum.Quarantined, sum.Duplicates, sum.Withdrawn, sum.Lost,
		sum.Unfinished, sum.FoundByListing, sum.FoundByEvent, sum.Head)
	if err != nil {
		fmt.Fprintf(stderr, "lotgate watch: %v\n", err)
		return exitFileFail
	}
	if sum.Unfinished > 0 {
		return exitFileFail
	}
	return exitOK
}

// crashHook reads LOTGATE_WATCH_CRASH_AFTER=EVENT:N, a fault injection for
// crash tests: the process kills itself (SIGKILL) right after the N-th
// ledger entry of that event is on disk.
func crashHook(spec string) (func(string), error) {
	if spec == "" {
		return nil, nil
	}
	event, nth, ok := strings.Cut(spec, ":")
	n, err := strconv.Atoi(nth)
	if !ok || err != nil || n < 1 {
		return nil, fmt.Errorf("LOTGATE_WATCH_CRASH_AFTER=%q: want EVENT:N, e.g. claimed:3", spec)
	}
	var seen atomic.Int64
	return func(ev string) {
		if ev == event && seen.Add(1) == int64(n) {
			if p, err := os.FindProcess(os.Getpid()); err == nil {
				_ = p.Kill()
			}
			select {}
		}
	}, nil
}

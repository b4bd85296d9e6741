package watch

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"log/slog"
	"os"
	"path/filepath"
	"slices"
	"strings"
	"sync"
	"time"

	"github.com/fsnotify/fsnotify"

	"lotgate/pipeline"
	"lotgate/pipeline/ledger"
)

// File names in the output folder.
const (
	LedgerFile = "ledger.jsonl"
	LockFile   = "watch.lock"
)

// Options configure a Watcher. Pipeline, Inbox and Out are required; the
// zero value of every other field means its default.
type Options struct {
	// Pipeline is loaded once, before the watcher starts.
	Pipeline *pipeline.Pipeline
	// PipelinePath is the pipeline's file; it and the files the pipeline
	// names are fingerprinted at every rescan, and an edit is reported
	// (and recorded in the ledger), never used.
	PipelinePath string
	// Inbox is the drop folder; it must exist. Out receives the documents,
	// the ledger and the lock.
	Inbox, Out string
	// Work, Archive and Quarantine default to folders of those names in
	// Out. Work must be on the inbox's file system and the other two on
	// Work's, so that every move is an atomic rename.
	Work, Archive, Quarantine string
	// Workers is the number of files processed at once (default 1).
	Workers int
	// Settle is how long a file's size and modification time must stay
	// unchanged, over at least three checks, before it is taken (default 3s).
	Settle time.Duration
	// Rescan is the interval of full listings of the inbox (default 30s).
	Rescan time.Duration
	// Poll turns file-system events off: the inbox is found by listing only
	// (for network shares where events do not arrive).
	Poll bool
	// IncompleteAfter is how long a settled file that still looks
	// unfinished (empty, or no line end after its last line) waits before
	// it is taken anyway (default 1m).
	IncompleteAfter time.Duration
	// StopTimeout bounds how long a graceful stop waits for the files in
	// flight (default 30s); then their processing is abandoned, and they
	// are redone at the next start.
	StopTimeout time.Duration
	// MaxPending bounds the files tracked in the inbox at once (default
	// 10000); more are picked up as room frees.
	MaxPending int
	// UntilIdle makes Run return once nothing is left to do.
	UntilIdle bool
	// Logger receives structured logs (default: discarded).
	Logger *slog.Logger
	// AfterAppend, when set, is called after each ledger entry is on disk,
	// with its event.
	AfterAppend func(event string)
}

// Summary is what a session did.
type Summary struct {
	Counts
	// FoundByListing and FoundByEvent count the inbox files first noticed
	// by a listing and by a file-system event.
	FoundByListing, FoundByEvent int
	// Head is the ledger's last entry as "SEQ:HASH".
	Head string
}

// Watcher processes the files dropped into an inbox exactly once, keeping
// a ledger of every state change in the output folder.
type Watcher struct {
	opt        Options
	p          *pipeline.Pipeline
	digest     string // the pipeline's or bundle's digest, for output names
	log        *slog.Logger
	checkEvery time.Duration

	lock *os.File
	led  *ledger.Ledger
	st   *state

	fatalOnce sync.Once
	fatal     chan error
	wake      chan struct{} // a worker is free

	mu          sync.Mutex // guards the fields below
	cands       map[string]*candidate
	resume      []int64  // open items to finish
	readyQ      []string // settled files, oldest first
	dirsSeen    map[string]bool
	stuck       map[int64]bool
	pipeFP      string // the fingerprint last seen
	loadedFP    string // the fingerprint at start
	byListing   int
	byEvent     int
	overPending bool
	lastStatus  string // the last status logged (scanner only)
}

// New checks the options, creates the output folders, takes the output
// folder's lock, reads and checks the ledger (setting a torn last line
// aside), and records the start. It refuses a damaged ledger, and an empty
// or missing ledger beside folders that already hold files.
func New(opt Options) (*Watcher, error) {
	if err := opt.resolve(); err != nil {
		return nil, err
	}
	w := &Watcher{opt: opt, p: opt.Pipeline, log: opt.Logger, st: newState(), fatal: make(chan error, 1), wake: make(chan struct{}, 1),
		cands: map[string]*candidate{}, dirsSeen: map[string]bool{}, stuck: map[int64]bool{}}
	w.digest = w.p.Digest
	if w.p.Bundle != "" {
		w.digest = w.p.Bundle
	}
	w.checkEvery = min(max(opt.Settle/4, 20*time.Millisecond), time.Second)
	if _, err := pipeline.RunTime(); err != nil {
		return nil, err
	}
	lock, err := lockFolder(filepath.Join(opt.Out, LockFile))
	if err != nil {
		return nil, err
	}
	w.lock = lock
	if err := w.openLedger(); err != nil {
		lock.Close()
		return nil, err
	}
	w.sweepTemporary()
	w.loadedFP = w.fingerprint()
	w.pipeFP = w.loadedFP
	_, err = w.append(Entry{Event: EvStart, Tool: "lotgate " + pipeline.Version, PID: os.Getpid(),
		Pipeline: &PipelineInfo{File: w.p.File, SHA256: w.p.Digest, Bundle: w.p.Bundle},
		Folders:  &Folders{Inbox: w.rel(opt.Inbox), Work: w.rel(opt.Work), Archive: w.rel(opt.Archive), Quarantine: w.rel(opt.Quarantine)},
		Settings: &Settings{Workers: opt.Workers, Settle: opt.Settle.String(), Rescan: opt.Rescan.String(),
			IncompleteAfter: opt.IncompleteAfter.String(), Poll: opt.Poll}})
	if err != nil {
		w.Close()
		return nil, err
	}
	return w, nil
}

// resolve fills in defaults, makes the folders and checks them.
func (o *Options) resolve() error {
	switch {
	case o.Pipeline == nil:
		return errors.New("no pipeline")
	case o.Inbox == "":
		return errors.New("no inbox folder")
	case o.Out == "":
		return errors.New("no output folder")
	case o.Workers < 0, o.Settle < 0, o.Rescan < 0, o.IncompleteAfter < 0, o.StopTimeout < 0, o.MaxPending < 0:
		return errors.New("workers, times and limits may not be negative")
	}
	def := func(d *time.Duration, v time.Duration) {
		if *d == 0 {
			*d = v
		}
	}
	def(&o.Settle, 3*time.Second)
	def(&o.Rescan, 30*time.Second)
	def(&o.IncompleteAfter, time.Minute)
	def(&o.StopTimeout, 30*time.Second)
	o.IncompleteAfter = max(o.IncompleteAfter, o.Settle)
	if o.Workers == 0 {
		o.Workers = 1
	}
	if o.MaxPending == 0 {
		o.MaxPending = 10000
	}
	if o.Logger == nil {
		o.Logger = slog.New(slog.NewTextHandler(io.Discard, nil))
	}
	st, err := os.Stat(o.Inbox)
	if err != nil {
		return fmt.Errorf("inbox: %w (the inbox must exist; is the share mounted?)", err)
	}
	if !st.IsDir() {
		return fmt.Errorf("inbox %s is not a folder", o.Inbox)
	}
	for _, d := range []struct {
		p    *string
		name string
	}{{&o.Work, "work"}, {&o.Archive, "archive"}, {&o.Quarantine, "quarantine"}} {
		if *d.p == "" {
			*d.p = filepath.Join(o.Out, d.name)
		}
	}
	folders := []struct {
		p    *string
		role string
	}{{&o.Inbox, "inbox"}, {&o.Out, "output folder"}, {&o.Work, "work folder"}, {&o.Archive, "archive"}, {&o.Quarantine, "quarantine"}}
	distinct := func(resolve func(string) (string, error)) error {
		seen := map[string]string{}
		for _, d := range folders {
			abs, err := resolve(*d.p)
			if err != nil {
				return err
			}
			if prev, ok := seen[abs]; ok {
				return fmt.Errorf("the %s and the %s are the same folder (%s); each needs its own", prev, d.role, abs)
			}
			seen[abs], *d.p = d.role, abs
		}
		return nil
	}
	// Distinct by name before anything is made, and by what they resolve
	// to after.
	if err := distinct(filepath.Abs); err != nil {
		return err
	}
	for _, d := range folders[1:] {
		if err := os.MkdirAll(*d.p, 0o755); err != nil {
			return err
		}
	}
	if err := distinct(filepath.EvalSymlinks); err != nil {
		return err
	}
	for _, pair := range [][2]string{{o.Inbox, o.Work}, {o.Work, o.Archive}, {o.Work, o.Quarantine}} {
		same, err := sameFileSystem(pair[0], pair[1])
		if err != nil {
			return err
		}
		if !same {
			return fmt.Errorf("%s and %s are on different file systems, so files cannot be moved between them by an atomic rename; put the work, archive and quarantine folders on the inbox's file system (--work, --archive, --quarantine)", pair[0], pair[1])
		}
	}
	return nil
}

// rel names a folder relative to the output folder when it is inside it.
func (w *Watcher) rel(dir string) string {
	if r, err := filepath.Rel(w.opt.Out, dir); err == nil && r != ".." && !strings.HasPrefix(r, ".."+string(filepath.Separator)) {
		return filepath.ToSlash(r)
	}
	return dir
}

// openLedger opens the ledger and replays it into the state.
func (w *Watcher) openLedger() error {
	path := filepath.Join(w.opt.Out, LedgerFile)
	var replayErr error
	led, err := ledger.Open(path, func(l ledger.Line) {
		e, err := decode(l)
		if err == nil {
			err = w.st.apply(l, e, false)
		}
		if err != nil && replayErr == nil {
			replayErr = err
		}
	})
	if err != nil {
		return fmt.Errorf("%w\nrun `lotgate ledger verify %s` for a full report; the ledger must be repaired or restored before files are taken", err, w.opt.Out)
	}
	if replayErr != nil {
		led.Close()
		return fmt.Errorf("ledger %s does not describe a valid history: %v; refusing to start", path, replayErr)
	}
	w.led = led
	if t := led.TornSetAside(); t != nil {
		w.log.Warn("the ledger's last line was torn by an interrupted write; set aside, the work it announced is redone",
			"line", t.Line, "bytes", len(t.Data), "saved_as", t.File)
	}
	if led.Last().Seq == 0 {
		if n, example := w.heldFiles(); n > 0 {
			led.Close()
			return fmt.Errorf("ledger %s is empty or missing, but the folders already hold %d files (%s): their history would be lost; restore the ledger from a backup, or start with an empty output folder", path, n, example)
		}
	}
	return nil
}

// heldFiles counts the files in the output, work, archive and quarantine
// folders that a watcher would have written.
func (w *Watcher) heldFiles() (n int, example string) {
	own := map[string]bool{LedgerFile: true, LockFile: true}
	for _, d := range []string{w.opt.Inbox, w.opt.Work, w.opt.Archive, w.opt.Quarantine} {
		own[filepath.Base(d)] = own[filepath.Base(d)] || filepath.Dir(d) == w.opt.Out
	}
	for _, d := range []string{w.opt.Out, w.opt.Work, w.opt.Archive, w.opt.Quarantine} {
		entries, _ := os.ReadDir(d)
		for _, e := range entries {
			name := e.Name()
			if d == w.opt.Out && (own[name] || strings.HasPrefix(name, LedgerFile+".torn-")) || isTemporary(name) {
				continue
			}
			if n == 0 {
				example = filepath.Join(d, name)
			}
			n++
		}
	}
	return n, example
}

// isTemporary matches the temporary files of an atomic write.
func isTemporary(name string) bool {
	return strings.HasPrefix(name, ".") && strings.HasSuffix(name, ".tmp")
}

// sweepTemporary removes the temporary files that writes interrupted by a
// crash left in the output and quarantine folders; they were never a
// document.
func (w *Watcher) sweepTemporary() {
	for _, d := range []string{w.opt.Out, w.opt.Quarantine} {
		entries, _ := os.ReadDir(d)
		for _, e := range entries {
			if e.Type().IsRegular() && isTemporary(e.Name()) {
				p := filepath.Join(d, e.Name())
				if err := os.Remove(p); err == nil {
					w.log.Warn("removed the temporary file of an interrupted write", "file", p)
				}
			}
		}
	}
}

// errLedger marks a failed append: the watcher cannot go on.
var errLedger = errors.New("ledger append failed")

// append writes one entry and applies it to the state.
func (w *Watcher) append(e Entry) (ledger.Line, error) {
	e.Time = time.Now().UTC().Format(time.RFC3339Nano)
	var applyErr error
	l, err := w.led.Append(e, func(l ledger.Line) { applyErr = w.st.apply(l, &e, true) })
	if err != nil {
		err = fmt.Errorf("%w: %v", errLedger, err)
		w.fatalOnce.Do(func() { w.fatal <- err })
		return l, err
	}
	if applyErr != nil {
		return l, fmt.Errorf("internal error: %v", applyErr)
	}
	if w.log.Enabled(context.Background(), slog.LevelDebug) {
		args := []any{"seq", l.Seq, "event", e.Event}
		if id := max(e.Item, itemOf(l, e)); id != 0 {
			args = append(args, "item", id)
		}
		if e.File != "" {
			args = append(args, "file", e.File)
		}
		w.log.Debug("ledger", args...)
	}
	if w.opt.AfterAppend != nil {
		w.opt.AfterAppend(e.Event)
	}
	return l, nil
}

// itemOf is the item a received entry starts.
func itemOf(l ledger.Line, e Entry) int64 {
	if e.Event == EvReceived {
		return l.Seq
	}
	return 0
}

// fingerprint hashes the pipeline file and the files it names (a bundle
// is one file).
func (w *Watcher) fingerprint() string {
	if w.opt.PipelinePath == "" {
		return ""
	}
	h := sha256.New()
	files := []string{w.opt.PipelinePath}
	if w.p.Bundle == "" { // a frozen bundle carries the files it names
		for _, r := range w.p.Refs {
			if !filepath.IsAbs(r) {
				r = filepath.Join(filepath.Dir(w.opt.PipelinePath), r)
			}
			files = append(files, r)
		}
	}
	for _, f := range files {
		b, err := os.ReadFile(f)
		sum := sha256.Sum256(b)
		fmt.Fprintf(h, "%s\x00%x\x00%v\n", f, sum, err != nil)
	}
	return hex.EncodeToString(h.Sum(nil))
}

// checkPipeline reports an edit of the pipeline (or a file it names) made
// while watching; the loaded pipeline stays in use.
func (w *Watcher) checkPipeline() {
	fp := w.fingerprint()
	w.mu.Lock()
	changed := fp != w.pipeFP
	w.pipeFP = fp
	w.mu.Unlock()
	if !changed {
		return
	}
	if fp == w.loadedFP {
		w.log.Info("the pipeline files are back to the version loaded at start", "pipeline", w.opt.PipelinePath)
		return
	}
	b, err := os.ReadFile(w.opt.PipelinePath)
	sum := sha256.Sum256(b)
	now := hex.EncodeToString(sum[:])
	reason := "the pipeline file or a file it names was edited while watching; the version loaded at start is still used"
	if err != nil {
		now, reason = "", "the pipeline file cannot be read any more ("+err.Error()+"); the version loaded at start is still used"
	}
	w.log.Warn(reason+"; restart the watcher to use the new version", "pipeline", w.opt.PipelinePath,
		"loaded_sha256", w.p.Digest, "file_sha256_now", now)
	_, _ = w.append(Entry{Event: EvPipelineChanged, Pipeline: &PipelineInfo{File: w.p.File, SHA256: now}, Reason: reason})
}

// job is one unit of work: a file in the inbox to take, or an open item to
// finish.
type job struct {
	name  string
	cand  candidate
	item  int64
	start time.Time
}

// Run watches the inbox until ctx is cancelled (or, with UntilIdle, until
// nothing is left to do), then stops taking files, lets the files in flight
// finish (for at most StopTimeout) and records the stop. It returns an
// error when the ledger could not be written.
func (w *Watcher) Run(ctx context.Context) (Summary, error) {
	var events <-chan fsnotify.Event
	var errs <-chan error
	if !w.opt.Poll {
		fw, err := fsnotify.NewWatcher()
		if err == nil {
			if err = fw.Add(w.opt.Inbox); err != nil {
				fw.Close()
			}
		}
		if err != nil {
			w.log.Warn("file-system events are not available; finding files by listing only", "error", err, "rescan", w.opt.Rescan)
		} else {
			defer fw.Close()
			events, errs = fw.Events, fw.Errors
		}
	}
	return w.serve(ctx, events, errs)
}

// serve is Run's loop over a source of file-system events (nil channels
// when there are none).
func (w *Watcher) serve(ctx context.Context, events <-chan fsnotify.Event, errs <-chan error) (Summary, error) {
	work, abort := context.WithCancel(context.Background())
	defer abort()
	jobs := make(chan job, w.opt.Workers)
	var wg sync.WaitGroup
	for range w.opt.Workers {
		wg.Go(func() {
			for j := range jobs {
				w.do(work, j)
				select {
				case w.wake <- struct{}{}:
				default:
				}
			}
		})
	}
	w.log.Info("watching", "inbox", w.opt.Inbox, "out", w.opt.Out, "pipeline", w.p.File, "pipeline_sha256", w.p.Digest,
		"workers", w.opt.Workers, "settle", w.opt.Settle, "rescan", w.opt.Rescan, "events", events != nil,
		"ledger_head", w.led.Last().Head())
	w.reconcile()
	check := time.NewTicker(w.checkEvery)
	defer check.Stop()
	rescan := time.NewTicker(w.opt.Rescan)
	defer rescan.Stop()
	var runErr error
loop:
	for {
		select {
		case <-ctx.Done():
			break loop
		case runErr = <-w.fatal:
			w.log.Error("stopping: the ledger cannot be written", "error", runErr)
			break loop
		case ev, ok := <-events:
			if !ok {
				events = nil
				continue
			}
			w.noteEvent(ev)
		case err, ok := <-errs:
			if !ok {
				errs = nil
				continue
			}
			w.log.Warn("file-system events were lost or failed; listing the inbox now", "error", err)
			w.reconcile()
		case <-w.wake:
			w.dispatch(jobs)
		case <-check.C:
			w.observe()
			w.dispatch(jobs)
			if w.opt.UntilIdle && w.idle() {
				w.log.Info("nothing left to do")
				break loop
			}
		case <-rescan.C:
			w.reconcile()
		}
	}
	// Stop taking files: what is queued but not started stays where it is.
	for queued := true; queued; {
		select {
		case j := <-jobs:
			if j.name == "" {
				w.st.idle(j.item)
			}
		default:
			queued = false
		}
	}
	close(jobs)
	done := make(chan struct{})
	go func() { wg.Wait(); close(done) }()
	if c, busy := w.st.snapshot(); busy > 0 || ctx.Err() != nil {
		w.log.Info("stopping: finishing the files in flight", "in_flight", busy, "unfinished", c.Unfinished, "timeout", w.opt.StopTimeout)
	}
	select {
	case <-done:
	case <-time.After(w.opt.StopTimeout):
		w.log.Warn("stop timeout: abandoning the files in flight; they are redone at the next start")
		abort()
		<-done
	}
	c, _ := w.st.snapshot()
	if runErr == nil {
		_, runErr = w.append(Entry{Event: EvStop, Counts: &c})
	}
	w.mu.Lock()
	sum := Summary{Counts: c, FoundByListing: w.byListing, FoundByEvent: w.byEvent, Head: w.led.Last().Head()}
	w.mu.Unlock()
	w.log.Info("stopped", "certified", c.Certified, "passed", c.Passed, "quarantined", c.Quarantined,
		"duplicates", c.Duplicates, "withdrawn", c.Withdrawn, "lost", c.Lost, "unfinished", c.Unfinished, "ledger_head", sum.Head)
	return sum, runErr
}

// Close closes the ledger and releases the lock.
func (w *Watcher) Close() error {
	err := w.led.Close()
	if cerr := w.lock.Close(); err == nil {
		err = cerr
	}
	return err
}

// do runs one job on a worker.
func (w *Watcher) do(ctx context.Context, j job) {
	if j.name != "" {
		w.takeJob(ctx, j)
		return
	}
	err := w.finish(ctx, j.item)
	w.release(j.item, err)
	if err == nil {
		w.done(j.item, j.start)
	}
}

// release records how work on an item ended and frees it.
func (w *Watcher) release(id int64, err error) {
	w.st.idle(id)
	w.mu.Lock()
	if err != nil {
		w.stuck[id] = true
	} else {
		delete(w.stuck, id)
	}
	w.mu.Unlock()
	if err != nil && !errors.Is(err, errLedger) && !errors.Is(err, context.Canceled) {
		it := w.st.get(id)
		w.log.Error("item left unfinished; retried at the next rescan", "item", id, "file", it.file, "state", it.state, "error", err)
	}
}

// idle reports that nothing is left to do: no file in flight, none
// settling in the inbox, and every open item tried and failed this session.
func (w *Watcher) idle() bool {
	w.st.mu.Lock()
	busy := len(w.st.busy)
	var open []int64
	for id := range w.st.open {
		open = append(open, id)
	}
	w.st.mu.Unlock()
	w.mu.Lock()
	defer w.mu.Unlock()
	if busy > 0 || len(w.resume) > 0 || w.overPending {
		return false
	}
	for _, c := range w.cands {
		if !c.blocked {
			return false
		}
	}
	return !slices.ContainsFunc(open, func(id int64) bool { return !w.stuck[id] })
}

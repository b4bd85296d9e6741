package watch

import (
	"cmp"
	"context"
	"errors"
	"fmt"
	"io/fs"
	"os"
	"path/filepath"
	"slices"
	"time"

	"github.com/fsnotify/fsnotify"
)

// candidate is a file in the inbox that has not been taken yet.
type candidate struct {
	fi     os.FileInfo // the last observation; nil before the first
	since  time.Time   // when fi was first seen unchanged
	checks int         // observations of fi since then
	// incomplete: settled but still looking unfinished; it waits for
	// IncompleteAfter. blocked: it could not be opened; it is retried after
	// retry.
	incomplete, blocked bool
	retry               time.Time
	// ready: settled and queued; dispatched: a worker has it.
	ready, dispatched bool
}

// same reports whether two observations show the same, unchanged file.
func same(a, b os.FileInfo) bool {
	return a.Size() == b.Size() && a.ModTime().Equal(b.ModTime()) && a.Mode() == b.Mode() && os.SameFile(a, b)
}

// note adds a name to the candidates; it reports whether it was new.
func (w *Watcher) note(name string) bool {
	if _, ok := w.cands[name]; ok {
		return false
	}
	if len(w.cands) >= w.opt.MaxPending {
		w.overPending = true
		return false
	}
	w.cands[name] = &candidate{}
	return true
}

// noteEvent takes a file-system event as a hint: a new name becomes a
// candidate, and a write restarts its settling.
func (w *Watcher) noteEvent(ev fsnotify.Event) {
	dir, name := filepath.Split(ev.Name)
	if filepath.Clean(dir) != w.opt.Inbox {
		if ev.Name == w.opt.Inbox {
			w.log.Warn("the inbox itself changed; listing it", "op", ev.Op.String())
			w.reconcile()
		}
		return
	}
	if ignoredName(name) || !ev.Has(fsnotify.Create|fsnotify.Write|fsnotify.Chmod) {
		return
	}
	w.mu.Lock()
	defer w.mu.Unlock()
	if w.note(name) {
		w.byEvent++
	} else if c := w.cands[name]; c != nil && ev.Has(fsnotify.Write) && !c.ready && !c.dispatched {
		c.fi = nil
	}
}

// reconcile lists the inbox and the ledger: every file not yet known
// becomes a candidate, candidates that left are dropped, and every open
// item no worker is on is queued to be finished. It also checks the
// pipeline files and logs a status line.
func (w *Watcher) reconcile() {
	entries, err := os.ReadDir(w.opt.Inbox)
	if err != nil {
		w.log.Error("cannot list the inbox; retrying at the next rescan", "inbox", w.opt.Inbox, "error", err)
	}
	ids := w.st.claimOpen()
	w.mu.Lock()
	if err == nil {
		present := make(map[string]bool, len(entries))
		w.overPending = false
		for _, e := range entries {
			name := e.Name()
			if ignoredName(name) {
				continue
			}
			if e.IsDir() {
				if !w.dirsSeen[name] {
					w.dirsSeen[name] = true
					w.log.Warn("the inbox holds a folder, which is not watched; drop files into the inbox itself", "folder", name)
				}
				continue
			}
			present[name] = true
			if w.note(name) {
				w.byListing++
			}
		}
		for name, c := range w.cands {
			if !present[name] && !c.dispatched {
				delete(w.cands, name)
			}
		}
	}
	w.resume = append(w.resume, ids...)
	pending, resume, over := len(w.cands), len(w.resume), w.overPending
	w.mu.Unlock()
	w.checkPipeline()
	c, busy := w.st.snapshot()
	args := []any{"pending", pending, "to_finish", resume, "in_flight", busy, "certified", c.Certified,
		"quarantined", c.Quarantined, "duplicates", c.Duplicates, "unfinished", c.Unfinished, "over_pending_limit", over}
	if status := fmt.Sprint(args...); status != w.lastStatus {
		w.lastStatus = status
		w.log.Info("status", args...)
	}
}

// observe looks at every candidate not yet settled once; those that have
// settled join the ready queue, oldest first.
func (w *Watcher) observe() {
	w.mu.Lock()
	defer w.mu.Unlock()
	now := time.Now()
	type ready struct {
		name string
		c    *candidate
	}
	var rs []ready
	for name, c := range w.cands {
		if c.ready || c.dispatched {
			continue
		}
		fi, err := os.Lstat(filepath.Join(w.opt.Inbox, name))
		if err != nil {
			if errors.Is(err, fs.ErrNotExist) {
				delete(w.cands, name)
			}
			continue
		}
		if fi.IsDir() {
			delete(w.cands, name)
			continue
		}
		if c.fi == nil || !same(c.fi, fi) {
			*c = candidate{fi: fi, since: now, checks: 1}
			continue
		}
		c.checks++
		wait := w.opt.Settle
		if c.incomplete {
			wait = w.opt.IncompleteAfter
		}
		if c.checks >= 3 && now.Sub(c.since) >= wait && !now.Before(c.retry) {
			rs = append(rs, ready{name, c})
		}
	}
	slices.SortFunc(rs, func(a, b ready) int {
		return cmp.Or(a.c.since.Compare(b.c.since), cmp.Compare(a.name, b.name))
	})
	for _, r := range rs {
		r.c.ready = true
		w.readyQ = append(w.readyQ, r.name)
	}
}

// dispatch hands work to the workers while the queue has room: first the
// open items to finish, then the settled files.
func (w *Watcher) dispatch(jobs chan<- job) {
	w.mu.Lock()
	defer w.mu.Unlock()
	for len(w.resume) > 0 {
		select {
		case jobs <- job{item: w.resume[0], start: time.Now()}:
			w.resume = w.resume[1:]
		default:
			return
		}
	}
	for len(w.readyQ) > 0 {
		name := w.readyQ[0]
		c := w.cands[name]
		if c == nil || !c.ready {
			w.readyQ = w.readyQ[1:]
			continue
		}
		select {
		case jobs <- job{name: name, cand: *c, start: time.Now()}:
			c.ready, c.dispatched = false, true
			w.readyQ = w.readyQ[1:]
		default:
			return
		}
	}
}

// takeJob takes one settled file and, once claimed, finishes it.
func (w *Watcher) takeJob(ctx context.Context, j job) {
	id, out, err := w.take(j.name, j.cand)
	w.mu.Lock()
	if c := w.cands[j.name]; c != nil {
		switch out {
		case outIncomplete:
			c.incomplete, c.dispatched = true, false
		case outBlocked:
			c.blocked, c.dispatched, c.retry = true, false, time.Now().Add(w.opt.Settle)
		default:
			// Taken, gone or changed: observe the name afresh (a new
			// file may already be there under it).
			*c = candidate{}
		}
	}
	w.mu.Unlock()
	switch out {
	case outBlocked:
		if !j.cand.blocked {
			w.log.Warn("cannot open a file in the inbox; retrying", "file", displayName(j.name), "error", err)
		}
		return
	case outIncomplete:
		if !j.cand.incomplete {
			w.log.Info("file looks unfinished (empty, or no line end after its last line); waiting", "file", displayName(j.name), "up_to", w.opt.IncompleteAfter)
		}
		return
	}
	if id == 0 {
		if err != nil {
			w.log.Error("cannot take a file from the inbox", "file", displayName(j.name), "error", err)
		}
		return
	}
	if err == nil {
		err = w.finish(ctx, id)
	}
	w.release(id, err)
	if err == nil {
		w.done(id, j.start)
	}
}

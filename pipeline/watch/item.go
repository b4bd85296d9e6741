package watch

import (
	"context"
	"crypto/sha256"
	"encoding/hex"
	"errors"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path/filepath"
	"time"

	"lotgate/pipeline"
	"lotgate/pipeline/ledger"
	"lotgate/reports"
)

// outcome is how an attempt to take a file from the inbox ended.
type outcome int

const (
	outTaken      outcome = iota // claimed (or withdrawn): an item exists
	outGone                      // no longer in the inbox, or not recorded
	outChanged                   // changed since it was seen settled
	outIncomplete                // settled but looks unfinished
	outBlocked                   // cannot be opened
)

// take checks a settled file once more, records it as received, claims it
// by renaming it into the work folder and records the claim. It returns
// the item, or 0 when nothing was recorded.
func (w *Watcher) take(name string, c candidate) (int64, outcome, error) {
	path := filepath.Join(w.opt.Inbox, name)
	fi, err := os.Lstat(path)
	switch {
	case errors.Is(err, fs.ErrNotExist):
		return 0, outGone, nil
	case err != nil:
		return 0, outBlocked, err
	case !same(c.fi, fi):
		return 0, outChanged, nil
	}
	e := Entry{Event: EvReceived, File: displayName(name)}
	switch {
	case fi.Mode()&fs.ModeSymlink != 0:
		if e.Link, err = os.Readlink(path); err != nil {
			return 0, outBlocked, err
		}
	case fi.Mode().IsRegular():
		size, sum, complete, out, err := w.inspect(path, fi)
		if out != outTaken {
			return 0, out, err
		}
		if !complete && time.Since(c.since) < w.opt.IncompleteAfter {
			return 0, outIncomplete, nil
		}
		e.Size, e.SHA256 = &size, sum
	}
	l, err := w.append(e)
	if err != nil {
		return 0, outGone, err
	}
	id := l.Seq
	it := w.st.get(id)
	if err := os.Rename(path, filepath.Join(w.opt.Work, it.name)); err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			_, err = w.append(Entry{Event: EvWithdrawn, Item: id, Reason: "the file left the inbox before it could be claimed (removed, or taken by another watcher)"})
		}
		return id, outTaken, err
	}
	if err := syncDirs(w.opt.Work, w.opt.Inbox); err != nil {
		return id, outTaken, err
	}
	return id, outTaken, w.claimed(it)
}

// inspect reads a regular file through: its size, SHA-256 and whether it
// looks complete (not empty, a line end after its last line).
func (w *Watcher) inspect(path string, seen os.FileInfo) (size int64, sum string, complete bool, out outcome, err error) {
	f, err := openNoFollow(path)
	if err != nil {
		if errors.Is(err, fs.ErrNotExist) {
			return 0, "", false, outGone, nil
		}
		return 0, "", false, outBlocked, err
	}
	defer f.Close()
	h := sha256.New()
	tail := &lastByte{}
	size, err = io.Copy(io.MultiWriter(h, tail), f)
	if err != nil {
		return 0, "", false, outBlocked, err
	}
	now, err := f.Stat()
	if err != nil || !same(seen, now) || now.Size() != size {
		return 0, "", false, outChanged, nil
	}
	return size, hex.EncodeToString(h.Sum(nil)), size > 0 && (tail.b == '\n' || tail.b == '\r'), outTaken, nil
}

// lastByte remembers the last byte written to it.
type lastByte struct{ b byte }

func (t *lastByte) Write(p []byte) (int, error) {
	if len(p) > 0 {
		t.b = p[len(p)-1]
	}
	return len(p), nil
}

// claimed records an item's claim; its record will carry this entry as its
// ledger head and this time as its processing time.
func (w *Watcher) claimed(it item) error {
	at, err := pipeline.RunTime()
	if err != nil {
		return err
	}
	_, err = w.append(Entry{Event: EvClaimed, Item: it.id, Name: it.name, ProcessedAt: at.Format(time.RFC3339)})
	return err
}

// finish drives an item from whatever state the ledger gives it to a final
// one, one recorded step at a time. It is what a worker runs after a claim
// and what recovery runs after a crash: every step looks at where the
// item's file is now, so a step interrupted half-way is redone.
func (w *Watcher) finish(ctx context.Context, id int64) error {
	for {
		if err := ctx.Err(); err != nil {
			return err
		}
		it := w.st.get(id)
		var err error
		switch it.state {
		case EvReceived:
			err = w.resumeClaim(it)
		case EvClaimed, EvChanged, EvComputed:
			err = w.compute(ctx, it)
		case EvReported, EvDuplicate:
			err = w.move(it, w.opt.Archive, EvArchived)
		case EvRejected:
			err = w.quarantine(it)
		default:
			return nil
		}
		if err != nil {
			return err
		}
	}
}

// resumeClaim finishes a claim that a crash interrupted: the rename either
// happened (the file is in the work folder) or not (the item is withdrawn;
// the file, still in the inbox, is taken again as a new item).
func (w *Watcher) resumeClaim(it item) error {
	if _, err := os.Lstat(filepath.Join(w.opt.Work, it.name)); err == nil {
		return w.claimed(it)
	}
	_, err := w.append(Entry{Event: EvWithdrawn, Item: it.id,
		Reason: "not claimed before the watcher stopped; a file still in the inbox is taken again as a new item"})
	return err
}

// compute processes a claimed item and writes its documents.
func (w *Watcher) compute(ctx context.Context, it item) error {
	path := filepath.Join(w.opt.Work, it.name)
	reject := func(reason string) error {
		_, err := w.append(Entry{Event: EvRejected, Item: it.id, Reason: oneLine(reason)})
		return err
	}
	if it.link != "" {
		return reject(linkReason(w.opt.Inbox, it.file, it.link))
	}
	fi, err := os.Lstat(path)
	if errors.Is(err, fs.ErrNotExist) {
		_, err = w.append(Entry{Event: EvLost, Item: it.id, Reason: "the claimed file is missing from the work folder " + w.opt.Work})
		return err
	}
	if err != nil {
		return err
	}
	if !fi.Mode().IsRegular() {
		return reject(fmt.Sprintf("%s: is a %s, not a regular file", it.file, kind(fi.Mode())))
	}
	if dup := w.st.duplicateOf(it); dup != 0 {
		_, err := w.append(Entry{Event: EvDuplicate, Item: it.id, Of: dup})
		return err
	}
	data, tooBig, err := w.read(path)
	if err != nil {
		return err
	}
	if tooBig > 0 {
		return reject(fmt.Sprintf("%s: file is %d bytes, larger than the limit of %d bytes (raise max_mb in the input block if this is a real chromatogram)",
			it.file, tooBig, w.p.Input.MaxBytes))
	}
	if sum := sha256.Sum256(data); hex.EncodeToString(sum[:]) != it.sha {
		return w.changed(ctx, it, path)
	}
	at, err := time.Parse(time.RFC3339, it.processedAt)
	if err != nil {
		return fmt.Errorf("item %d: processing time %q: %w", it.id, it.processedAt, err)
	}
	rec, err := w.p.Process(ctx, it.file, data, at)
	if err != nil {
		if ctx.Err() != nil {
			return ctx.Err()
		}
		return reject(err.Error())
	}
	rec.Provenance.LedgerHead = it.head
	if it.state != EvComputed || it.verdict != rec.Verdict {
		if _, err := w.append(Entry{Event: EvComputed, Item: it.id, Verdict: rec.Verdict, LedgerHead: it.head}); err != nil {
			return err
		}
	}
	outs, err := reports.WriteAll(w.opt.Out, outputStem(it.file, it.sha, w.digest), rec, w.p.Logo, false)
	if err != nil {
		return fmt.Errorf("writing the documents of item %d (%s): %w", it.id, it.file, err)
	}
	e := Entry{Event: EvReported, Item: it.id}
	for _, o := range outs {
		e.Outputs = append(e.Outputs, Output{Format: o.Format, File: filepath.Base(o.Path), SHA256: o.SHA256})
	}
	_, err = w.append(e)
	return err
}

// read reads a claimed file; tooBig is its size when over the pipeline's
// limit (and then data is nil).
func (w *Watcher) read(path string) (data []byte, tooBig int64, err error) {
	f, err := openNoFollow(path)
	if err != nil {
		return nil, 0, err
	}
	defer f.Close()
	limit := w.p.Input.MaxBytes
	if st, err := f.Stat(); err == nil && st.Size() > limit {
		return nil, st.Size(), nil
	}
	data, err = io.ReadAll(io.LimitReader(f, limit+1))
	if err == nil && int64(len(data)) > limit {
		return nil, int64(len(data)), nil
	}
	return data, 0, err
}

// changed handles a claimed file whose content is not what was received:
// its writer was still at work. It waits for the file to settle in the work
// folder and records its new content.
func (w *Watcher) changed(ctx context.Context, it item, path string) error {
	w.log.Warn("file changed after it was taken; waiting for it to settle again", "item", it.id, "file", it.file)
	var prev os.FileInfo
	var since time.Time
	checks := 0
	for {
		fi, err := os.Lstat(path)
		if err != nil {
			return err
		}
		if prev == nil || !same(prev, fi) {
			prev, since, checks = fi, time.Now(), 1
		} else if checks++; checks >= 3 && time.Since(since) >= w.opt.Settle {
			break
		}
		select {
		case <-ctx.Done():
			return ctx.Err()
		case <-time.After(w.checkEvery):
		}
	}
	size, sum, _, out, err := w.inspect(path, prev)
	if out != outTaken {
		return fmt.Errorf("item %d (%s): still changing in the work folder: %v", it.id, it.file, err)
	}
	_, err = w.append(Entry{Event: EvChanged, Item: it.id, Size: &size, SHA256: sum})
	return err
}

// kind names a file type for a rejection.
func kind(m fs.FileMode) string {
	switch {
	case m&fs.ModeNamedPipe != 0:
		return "named pipe"
	case m&fs.ModeSocket != 0:
		return "socket"
	case m&fs.ModeDevice != 0:
		return "device"
	case m.IsDir():
		return "folder"
	}
	return "special file"
}

// quarantine writes a rejected item's reason beside it and moves it to the
// quarantine folder.
func (w *Watcher) quarantine(it item) error {
	reason := filepath.Join(w.opt.Quarantine, it.name+".reason.txt")
	if _, err := reports.WriteAtomic(reason, []byte(it.reason+"\n"), true); err != nil {
		return err
	}
	return w.move(it, w.opt.Quarantine, EvQuarantined)
}

// move moves an item's file from the work folder to dir and records ev.
// A move a crash interrupted is finished; a file found in neither place is
// recorded as lost.
func (w *Watcher) move(it item, dir, ev string) error {
	src, dst := filepath.Join(w.opt.Work, it.name), filepath.Join(dir, it.name)
	_, serr := os.Lstat(src)
	_, derr := os.Lstat(dst)
	switch {
	case serr == nil && derr == nil:
		return fmt.Errorf("item %d: %s and %s both exist; remove the copy that is not the original by hand", it.id, src, dst)
	case serr == nil:
		if err := os.Rename(src, dst); err != nil {
			return err
		}
		if err := syncDirs(dir, w.opt.Work); err != nil {
			return err
		}
	case derr != nil:
		_, err := w.append(Entry{Event: EvLost, Item: it.id, Reason: fmt.Sprintf("the file is in neither %s nor %s", w.opt.Work, dir)})
		return err
	}
	_, err := w.append(Entry{Event: ev, Item: it.id, Name: it.name})
	return err
}

func syncDirs(dirs ...string) error {
	for _, d := range dirs {
		if err := ledger.SyncDir(d); err != nil {
			return err
		}
	}
	return nil
}

// done logs how an item ended.
func (w *Watcher) done(id int64, start time.Time) {
	it := w.st.get(id)
	args := []any{"item", id, "file", it.file}
	switch {
	case it.state == EvArchived && it.of != 0:
		w.log.Info("duplicate: the same content was taken before; archived, not certified again", append(args, "of", it.of)...)
	case it.state == EvArchived:
		files := make([]string, len(it.outputs))
		for i, o := range it.outputs {
			files[i] = o.File
		}
		w.log.Info("certified", append(args, "verdict", it.verdict, "outputs", files, "seconds", time.Since(start).Seconds())...)
	case it.state == EvQuarantined:
		w.log.Warn("quarantined", append(args, "reason", it.reason)...)
	case it.state == EvWithdrawn, it.state == EvLost:
		w.log.Warn(it.state, append(args, "reason", it.reason)...)
	}
}

// Package ledger keeps an append-only, tamper-evident journal in JSON Lines.
//
// Every line is one JSON object that opens with its sequence number and the
// SHA-256 of the line before it and closes with its own SHA-256:
//
//	{"seq":7,"prev":"<64 hex>",…payload fields…,"hash":"<64 hex>"}
//
// The hash is the SHA-256 of the line's bytes up to (not including)
// `,"hash":"`. Sequence numbers start at 1 and rise by one; the first line's
// prev is Genesis. An edited line no longer matches its hash, a removed or
// inserted line breaks the sequence, a reordered line breaks both, and a
// line edited with its hash recomputed breaks the next line's prev.
//
// Append writes a line with a single write and syncs the file before it
// returns, so a state change recorded in the ledger is on disk before the
// work it allows is done. Concurrent appends share one sync (group commit).
// A power cut can leave a torn last line (no line end, or zero bytes); Open
// sets it aside into a side file and truncates the ledger to its last whole
// line. Any other damage makes Open refuse the ledger.
package ledger

import (
	"bufio"
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"strconv"
	"strings"
	"sync"
	"syscall"
)

// Genesis is the prev of the first line.
const Genesis = "0000000000000000000000000000000000000000000000000000000000000000"

// hashKey opens the closing hash field of a line.
const hashKey = `,"hash":"`

// Line is one verified line of a ledger.
type Line struct {
	// Seq is the sequence number, Prev the previous line's hash and Hash
	// this line's.
	Seq        int64
	Prev, Hash string
	// Raw is the whole line without its line end; payload fields can be
	// decoded from it with encoding/json.
	Raw []byte
	// Number is the 1-based line number in the file.
	Number int
}

// Head names a line as "SEQ:HASH", the form records cite.
func (l Line) Head() string { return strconv.FormatInt(l.Seq, 10) + ":" + l.Hash }

// Problem is one thing wrong with a ledger, at a line.
type Problem struct {
	Line int
	Msg  string
}

// String formats the problem as "line N: MSG".
func (p Problem) String() string { return fmt.Sprintf("line %d: %s", p.Line, p.Msg) }

// Torn describes an unfinished last line: the bytes of an append that a
// crash or power cut interrupted.
type Torn struct {
	// Line is its line number, Offset where it starts, Data its bytes.
	Line   int
	Offset int64
	Data   []byte
}

// Scan is what reading a ledger found.
type Scan struct {
	// Count is the number of whole lines and Last the last of them (zero
	// when there is none).
	Count int
	Last  Line
	// Size is the byte length of the whole lines (where a torn line starts).
	Size int64
	// Problems lists every break in the chain, in file order.
	Problems []Problem
	// Torn is the unfinished last line, if any.
	Torn *Torn
}

// Read reads a ledger from r, checks every line and the chain, and calls fn
// (when not nil) with each whole line in order, including lines that have
// problems. It returns an error only when r cannot be read.
func Read(r io.Reader, fn func(Line)) (*Scan, error) {
	br := bufio.NewReaderSize(r, 1<<16)
	s := &Scan{}
	prev, prevSeq := Genesis, int64(0)
	var off int64
	for n := 1; ; n++ {
		raw, err := br.ReadBytes('\n')
		if len(raw) == 0 && err == io.EOF {
			return s, nil
		}
		if err != nil && err != io.EOF {
			return s, err
		}
		whole := err == nil
		body := bytes.TrimSuffix(raw, []byte("\n"))
		if !whole || isZeros(body) {
			if last, _ := br.Peek(1); len(last) == 0 {
				s.Torn = &Torn{Line: n, Offset: off, Data: raw}
				return s, nil
			}
			s.Problems = append(s.Problems, Problem{n, "holds only zero bytes (damaged storage)"})
			off += int64(len(raw))
			continue
		}
		l, msg := parseLine(body)
		l.Number = n
		switch {
		case msg != "":
			s.Problems = append(s.Problems, Problem{n, msg})
		case l.Seq != prevSeq+1:
			s.Problems = append(s.Problems, Problem{n, fmt.Sprintf(
				"sequence number %d where %d was expected: a line is missing, inserted or out of order", l.Seq, prevSeq+1)})
		case l.Prev != prev:
			s.Problems = append(s.Problems, Problem{n, fmt.Sprintf(
				"its prev hash does not match line %d: a line before it was changed, removed or reordered", n-1)})
		}
		if l.Hash != "" { // the header is readable: the chain goes on from it
			prev, prevSeq = l.Hash, l.Seq
		}
		if msg == "" {
			s.Last = l
		}
		off += int64(len(raw))
		s.Count, s.Size = n, off
		if fn != nil {
			fn(l)
		}
	}
}

// ReadFile reads and checks the ledger at path; see Read. A missing file is
// an empty ledger.
func ReadFile(path string, fn func(Line)) (*Scan, error) {
	f, err := os.Open(path)
	if errors.Is(err, os.ErrNotExist) {
		return &Scan{}, nil
	}
	if err != nil {
		return nil, err
	}
	defer f.Close()
	return Read(f, fn)
}

func isZeros(b []byte) bool { return len(bytes.Trim(b, "\x00")) == 0 && len(b) > 0 }

// parseLine checks one line's form and its own hash; msg says what is
// wrong. The returned line has its header (Seq, Prev, Hash) whenever that is
// readable, even when the content does not match the hash.
func parseLine(b []byte) (l Line, msg string) {
	var h struct {
		Seq  *int64 `json:"seq"`
		Prev string `json:"prev"`
		Hash string `json:"hash"`
	}
	if err := json.Unmarshal(b, &h); err != nil {
		return l, "not a JSON object: " + err.Error()
	}
	if h.Seq == nil || !bytes.HasPrefix(b, []byte(`{"seq":`)) {
		return l, `does not open with "seq": not a ledger line`
	}
	if !isHex64(h.Prev) {
		return l, `has no valid "prev" hash`
	}
	tail := len(hashKey) + 64 + 2
	if len(b) < tail || string(b[len(b)-tail:len(b)-tail+len(hashKey)]) != hashKey ||
		string(b[len(b)-2:]) != `"}` || !isHex64(h.Hash) || string(b[len(b)-66:len(b)-2]) != h.Hash {
		return l, `does not close with its "hash": not a ledger line`
	}
	l = Line{Seq: *h.Seq, Prev: h.Prev, Hash: h.Hash, Raw: b}
	if sum := sha256.Sum256(b[:len(b)-tail]); hex.EncodeToString(sum[:]) != h.Hash {
		return l, fmt.Sprintf("seq %d: the content does not match its hash: the line was changed after it was written", *h.Seq)
	}
	return l, ""
}

func isHex64(s string) bool {
	if len(s) != 64 {
		return false
	}
	for _, c := range []byte(s) {
		if !('0' <= c && c <= '9' || 'a' <= c && c <= 'f') {
			return false
		}
	}
	return true
}

// ChainError is a ledger that Open refuses: its chain is broken somewhere
// other than a torn last line.
type ChainError struct {
	Path     string
	Problems []Problem
}

// Error lists every problem, one per line.
func (e *ChainError) Error() string {
	var b strings.Builder
	fmt.Fprintf(&b, "ledger %s is damaged or was edited; refusing to use it", e.Path)
	for _, p := range e.Problems {
		b.WriteString("\n  " + p.String())
	}
	return b.String()
}

// Ledger is an open ledger file that lines are appended to. It is safe for
// concurrent use.
type Ledger struct {
	path string

	mu      sync.Mutex // orders appends
	f       *os.File
	last    Line
	written int64
	err     error // a failed write or sync: the ledger takes no more lines

	syncMu sync.Mutex // one sync covers every line written before it
	synced int64

	torn *SetAside
}

// SetAside says where Open put a torn last line.
type SetAside struct {
	Torn
	// File is the side file holding the torn bytes.
	File string
}

// Open opens (or creates) the ledger at path for appending. It reads and
// checks every line first, calling fn (when not nil) with each in order. A
// broken chain is refused with a *ChainError. A torn last line is copied to
// a side file next to the ledger (path + ".torn-after-SEQ") and cut off, and
// reported by TornSetAside.
func Open(path string, fn func(Line)) (*Ledger, error) {
	f, err := os.OpenFile(path, os.O_RDWR|os.O_CREATE, 0o644)
	if err != nil {
		return nil, err
	}
	s, err := Read(f, fn)
	if err == nil && len(s.Problems) > 0 {
		err = &ChainError{Path: path, Problems: s.Problems}
	}
	l := &Ledger{path: path, f: f, last: s.Last, written: s.Size, synced: s.Size}
	if err == nil && s.Torn != nil {
		err = l.setAside(s.Torn)
	}
	if err == nil {
		_, err = f.Seek(s.Size, io.SeekStart)
	}
	if err != nil {
		f.Close()
		return nil, err
	}
	return l, nil
}

// setAside saves the torn bytes beside the ledger and truncates them away.
func (l *Ledger) setAside(t *Torn) error {
	base := fmt.Sprintf("%s.torn-after-%d", l.path, l.last.Seq)
	name := base
	var side *os.File
	for i := 1; ; i++ {
		var err error
		side, err = os.OpenFile(name, os.O_WRONLY|os.O_CREATE|os.O_EXCL, 0o644)
		if err == nil {
			break
		}
		if !errors.Is(err, os.ErrExist) {
			return err
		}
		name = fmt.Sprintf("%s.%d", base, i)
	}
	_, err := side.Write(t.Data)
	if err == nil {
		err = side.Sync()
	}
	if cerr := side.Close(); err == nil {
		err = cerr
	}
	if err == nil {
		err = SyncDir(filepath.Dir(l.path))
	}
	if err == nil {
		err = l.f.Truncate(t.Offset)
	}
	if err == nil {
		err = l.f.Sync()
	}
	if err != nil {
		return fmt.Errorf("ledger %s: setting its torn last line aside: %w", l.path, err)
	}
	l.torn = &SetAside{Torn: *t, File: name}
	return nil
}

// TornSetAside reports the torn last line Open set aside, or nil.
func (l *Ledger) TornSetAside() *SetAside { return l.torn }

// Last returns the last line written (zero before the first).
func (l *Ledger) Last() Line {
	l.mu.Lock()
	defer l.mu.Unlock()
	return l.last
}

// Append writes payload (which must marshal to a JSON object without the
// keys seq, prev and hash) as the next line and returns once the line is
// on disk. apply, when not nil, is called with the new line while appends
// are still held back, so that a caller's view of the ledger changes in
// ledger order. After a failed write or sync the ledger refuses every
// further append.
func (l *Ledger) Append(payload any, apply func(Line)) (Line, error) {
	fields, err := objectFields(payload)
	if err != nil {
		return Line{}, err
	}
	l.mu.Lock()
	if l.err != nil {
		l.mu.Unlock()
		return Line{}, l.err
	}
	seq := l.last.Seq + 1
	prev := Genesis
	if l.last.Seq > 0 {
		prev = l.last.Hash
	}
	body := fmt.Appendf(nil, `{"seq":%d,"prev":"%s"`, seq, prev)
	if len(fields) > 0 {
		body = append(append(body, ','), fields...)
	}
	sum := sha256.Sum256(body)
	h := hex.EncodeToString(sum[:])
	raw := append(append(append(body, hashKey...), h...), `"}`...)
	n, err := l.f.Write(append(raw, '\n'))
	if err != nil {
		l.err = fmt.Errorf("ledger %s: append failed, no further lines are written: %w", l.path, err)
		l.mu.Unlock()
		return Line{}, l.err
	}
	l.written += int64(n)
	line := Line{Seq: seq, Prev: prev, Hash: h, Raw: raw, Number: int(seq)}
	l.last = line
	if apply != nil {
		apply(line)
	}
	upTo := l.written
	l.mu.Unlock()
	return line, l.syncTo(upTo)
}

// syncTo returns once every byte up to offset upTo is synced; one sync
// serves every append waiting for it.
func (l *Ledger) syncTo(upTo int64) error {
	l.syncMu.Lock()
	defer l.syncMu.Unlock()
	if l.synced >= upTo {
		return nil
	}
	l.mu.Lock()
	end, failed := l.written, l.err
	l.mu.Unlock()
	if failed != nil {
		return failed
	}
	if err := l.f.Sync(); err != nil {
		l.mu.Lock()
		l.err = fmt.Errorf("ledger %s: sync failed, no further lines are written: %w", l.path, err)
		failed = l.err
		l.mu.Unlock()
		return failed
	}
	l.synced = end
	return nil
}

// objectFields marshals payload and returns the inside of the JSON object.
func objectFields(payload any) ([]byte, error) {
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	if err := enc.Encode(payload); err != nil {
		return nil, fmt.Errorf("ledger payload: %w", err)
	}
	raw := bytes.TrimSpace(b.Bytes())
	var keys map[string]json.RawMessage
	if err := json.Unmarshal(raw, &keys); err != nil || len(raw) < 2 || raw[0] != '{' {
		return nil, fmt.Errorf("ledger payload %s is not a JSON object", raw)
	}
	for _, k := range []string{"seq", "prev", "hash"} {
		if _, ok := keys[k]; ok {
			return nil, fmt.Errorf("ledger payload may not set %q: the ledger writes it", k)
		}
	}
	return raw[1 : len(raw)-1], nil
}

// Close closes the file.
func (l *Ledger) Close() error {
	l.mu.Lock()
	defer l.mu.Unlock()
	if l.err == nil {
		l.err = fmt.Errorf("ledger %s is closed", l.path)
	}
	return l.f.Close()
}

// SyncDir syncs a folder so that renames and new names in it are on disk.
// File systems that cannot sync a folder are tolerated.
func SyncDir(dir string) error {
	d, err := os.Open(dir)
	if err != nil {
		return err
	}
	defer d.Close()
	if err := d.Sync(); err != nil && !errors.Is(err, syscall.EINVAL) && !errors.Is(err, syscall.ENOTSUP) {
		return err
	}
	return nil
}

package watch

import (
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"fmt"
	"io"
	"os"
	"path/filepath"
	"slices"

	"lotgate/pipeline/ledger"
)

// Report is what Verify found in an output folder.
type Report struct {
	// Entries is the number of ledger lines and Head the last as "SEQ:HASH".
	Entries int
	Head    string
	// Items counts the files the ledger took; the rest break them down by
	// how they ended.
	Items, Certified, Duplicates, Quarantined, Withdrawn, Lost, Unfinished int
	// OutputsChecked and InputsChecked count the documents and archived
	// inputs whose digests were compared with the ledger.
	OutputsChecked, InputsChecked int
	// Problems lists everything that does not agree with the ledger.
	Problems []string
}

// Verify checks the watcher's ledger in the output folder out: the chain of
// every line, that the entries describe a valid history, that every
// document named in the ledger exists with its SHA-256 and (for records)
// names the ledger entry it was made under, that every archived input
// still has the digest it was received with, that every quarantined file
// and its reason are there, and that no content was certified twice.
func Verify(out string) (*Report, error) {
	path := filepath.Join(out, LedgerFile)
	if _, err := os.Stat(path); err != nil {
		return nil, err
	}
	r := &Report{}
	st := newState()
	where := map[int64]*Folders{} // the folders an item was archived or quarantined into
	s, err := ledger.ReadFile(path, func(l ledger.Line) {
		e, err := decode(l)
		if err == nil {
			err = st.apply(l, e, false)
		}
		if err != nil {
			r.problem("ledger %v", err)
			return
		}
		if (e.Event == EvArchived || e.Event == EvQuarantined) && st.start != nil {
			where[e.Item] = st.start.Folders
		}
	})
	if err != nil {
		return nil, err
	}
	for _, p := range s.Problems {
		r.problem("ledger %s", p)
	}
	if s.Torn != nil {
		r.problem("ledger line %d is torn (%d bytes of an interrupted append); the watcher sets it aside at its next start", s.Torn.Line, len(s.Torn.Data))
	}
	r.Entries, r.Head = s.Count, s.Last.Head()
	ids := make([]int64, 0, len(st.items))
	for id := range st.items {
		ids = append(ids, id)
	}
	slices.Sort(ids)
	certified := map[string]int64{}
	for _, id := range ids {
		it := st.items[id]
		r.Items++
		switch it.state {
		case EvArchived:
			if it.of != 0 {
				r.Duplicates++
			} else {
				r.Certified++
				r.checkOutputs(out, it)
				if prev, ok := certified[it.sha]; ok {
					r.problem("items %d and %d (%s): the same content (SHA-256 %s) was certified twice", prev, id, it.file, it.sha)
				}
				certified[it.sha] = id
			}
			r.checkInput(out, where[id], it)
		case EvQuarantined:
			r.Quarantined++
			r.checkQuarantined(out, where[id], it)
		case EvWithdrawn:
			r.Withdrawn++
		case EvLost:
			r.Lost++
		default:
			r.Unfinished++
			if it.state == EvReported {
				r.checkOutputs(out, it)
			}
		}
	}
	return r, nil
}

func (r *Report) problem(format string, args ...any) {
	r.Problems = append(r.Problems, fmt.Sprintf(format, args...))
}

// folder resolves one of the folders a start entry names.
func folder(out string, f *Folders, pick func(*Folders) string) string {
	if f == nil {
		return ""
	}
	d := filepath.FromSlash(pick(f))
	if !filepath.IsAbs(d) {
		d = filepath.Join(out, d)
	}
	return d
}

// checkOutputs compares an item's documents with the ledger.
func (r *Report) checkOutputs(out string, it *item) {
	for _, o := range it.outputs {
		r.OutputsChecked++
		p := filepath.Join(out, o.File)
		b, err := os.ReadFile(p)
		if err != nil {
			r.problem("item %d (%s): document %s: %v", it.id, it.file, o.File, err)
			continue
		}
		if sum := sha256.Sum256(b); hex.EncodeToString(sum[:]) != o.SHA256 {
			r.problem("item %d (%s): document %s does not have the SHA-256 the ledger recorded: it was changed or replaced", it.id, it.file, o.File)
			continue
		}
		if o.Format != "json" {
			continue
		}
		var rec struct {
			Provenance struct {
				InputSHA256 string `json:"input_sha256"`
				LedgerHead  string `json:"ledger_head"`
			} `json:"provenance"`
		}
		if err := json.Unmarshal(b, &rec); err != nil {
			r.problem("item %d (%s): record %s: %v", it.id, it.file, o.File, err)
			continue
		}
		if rec.Provenance.LedgerHead != it.head {
			r.problem("item %d (%s): record %s names ledger head %q, but the item was made under %q", it.id, it.file, o.File, rec.Provenance.LedgerHead, it.head)
		}
		if rec.Provenance.InputSHA256 != it.sha {
			r.problem("item %d (%s): record %s is of input %s, but the ledger received %s", it.id, it.file, o.File, rec.Provenance.InputSHA256, it.sha)
		}
	}
}

// checkInput compares an archived input with the digest it was taken with.
func (r *Report) checkInput(out string, f *Folders, it *item) {
	dir := folder(out, f, func(f *Folders) string { return f.Archive })
	r.InputsChecked++
	fh, err := os.Open(filepath.Join(dir, it.name))
	if err != nil {
		r.problem("item %d (%s): archived input: %v", it.id, it.file, err)
		return
	}
	defer fh.Close()
	h := sha256.New()
	if _, err := io.Copy(h, fh); err != nil {
		r.problem("item %d (%s): archived input: %v", it.id, it.file, err)
		return
	}
	if hex.EncodeToString(h.Sum(nil)) != it.sha {
		r.problem("item %d (%s): the archived input %s no longer has the SHA-256 it was received with", it.id, it.file, it.name)
	}
}

// checkQuarantined checks that a quarantined file and its reason are there.
func (r *Report) checkQuarantined(out string, f *Folders, it *item) {
	dir := folder(out, f, func(f *Folders) string { return f.Quarantine })
	for _, name := range []string{it.name, it.name + ".reason.txt"} {
		if _, err := os.Lstat(filepath.Join(dir, name)); err != nil {
			r.problem("item %d (%s): quarantined: %v", it.id, it.file, err)
		}
	}
}

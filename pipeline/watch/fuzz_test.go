package watch

import (
	"encoding/json"
	"path/filepath"
	"strings"
	"testing"

	"lotgate/pipeline/ledger"
)

// FuzzVerify: any history written through an intact chain — entries
// referring to unknown items, events out of order, odd field types,
// missing documents — is verified without panicking, and a history the
// state machine refuses is reported as a problem, never accepted.
func FuzzVerify(f *testing.F) {
	f.Add(`{"event":"start","folders":{"inbox":"in","work":"work","archive":"archive","quarantine":"quarantine"}}
{"event":"received","file":"a.csv","size":3,"sha256":"abc"}
{"event":"claimed","item":2,"name":"2-a.csv","processed_at":"2026-01-01T00:00:00Z"}
{"event":"computed","item":2,"verdict":"pass","ledger_head":"3:x"}
{"event":"reported","item":2,"outputs":[{"format":"json","file":"a.json","sha256":"00"}]}
{"event":"archived","item":2,"name":"2-a.csv"}`)
	f.Add(`{"event":"received","file":"a.csv"}
{"event":"reported","item":1}`)
	f.Add(`{"event":"claimed","item":9}`)
	f.Add(`{"event":"received","size":"big"}`)
	f.Add(`{"event":"received","file":"x"}
{"event":"claimed","item":1}
{"event":"duplicate","item":1,"of":1}
{"event":"archived","item":1}`)
	f.Fuzz(func(t *testing.T, history string) {
		dir := t.TempDir()
		l, err := ledger.Open(filepath.Join(dir, LedgerFile), nil)
		if err != nil {
			t.Fatal(err)
		}
		var entries []json.RawMessage
		for _, line := range strings.Split(history, "\n") {
			if _, err := l.Append(json.RawMessage(line), nil); err == nil {
				entries = append(entries, json.RawMessage(line))
			}
		}
		l.Close()
		r, err := Verify(dir)
		if err != nil {
			t.Fatal(err)
		}
		if r.Entries != len(entries) {
			t.Fatalf("%d entries verified, %d written", r.Entries, len(entries))
		}
		if _, err := replayRaw(entries); err != nil && len(r.Problems) == 0 {
			t.Fatalf("history refused by the state machine (%v) but verified", err)
		}
	})
}

// replayRaw applies raw entries to a fresh state.
func replayRaw(raw []json.RawMessage) (*state, error) {
	s := newState()
	for i, b := range raw {
		var e Entry
		l := ledger.Line{Seq: int64(i + 1), Number: i + 1, Raw: b}
		if err := json.Unmarshal(b, &e); err != nil {
			return s, err
		}
		if err := s.apply(l, &e, false); err != nil {
			return s, err
		}
	}
	return s, nil
}

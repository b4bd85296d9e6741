package ledger

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"sync"
	"testing"
)

type note struct {
	Event string `json:"event"`
	N     int    `json:"n"`
}

// build appends n notes to a new ledger in a temporary folder and returns
// its path and bytes.
func build(t testing.TB, n int) (string, []byte) {
	t.Helper()
	path := filepath.Join(t.TempDir(), "ledger.jsonl")
	l, err := Open(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	for i := range n {
		if _, err := l.Append(note{"step", i}, nil); err != nil {
			t.Fatal(err)
		}
	}
	if err := l.Close(); err != nil {
		t.Fatal(err)
	}
	b, err := os.ReadFile(path)
	if err != nil {
		t.Fatal(err)
	}
	return path, b
}

// The line format, rebuilt independently of the package: the hash is the
// SHA-256 (FIPS 180-4, via crypto/sha256; common practice) of the bytes
// before `,"hash":"`, and each line's prev is the hash of the line before.
func TestLineFormat(t *testing.T) {
	_, b := build(t, 3)
	lines := strings.Split(strings.TrimSuffix(string(b), "\n"), "\n")
	if len(lines) != 3 {
		t.Fatalf("%d lines, want 3", len(lines))
	}
	prev := strings.Repeat("0", 64)
	for i, line := range lines {
		body := fmt.Sprintf(`{"seq":%d,"prev":"%s","event":"step","n":%d`, i+1, prev, i)
		sum := sha256.Sum256([]byte(body))
		want := body + `,"hash":"` + hex.EncodeToString(sum[:]) + `"}`
		if line != want {
			t.Fatalf("line %d:\n got %s\nwant %s", i+1, line, want)
		}
		prev = hex.EncodeToString(sum[:])
	}
}

// Concurrent appends keep one unbroken chain, every payload exactly once,
// and apply sees the lines in ledger order.
func TestConcurrentAppend(t *testing.T) {
	path := filepath.Join(t.TempDir(), "ledger.jsonl")
	l, err := Open(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	const writers, each = 8, 50
	var wg sync.WaitGroup
	var order []int64
	for w := range writers {
		wg.Go(func() {
			for i := range each {
				if _, err := l.Append(note{"w", w*each + i}, func(ln Line) { order = append(order, ln.Seq) }); err != nil {
					t.Error(err)
				}
			}
		})
	}
	wg.Wait()
	l.Close()
	seen := map[int]bool{}
	s, err := ReadFile(path, func(ln Line) {
		var n struct{ N int }
		if err := json.Unmarshal(ln.Raw, &n); err != nil {
			t.Error(err)
		}
		seen[n.N] = true
	})
	if err != nil {
		t.Fatal(err)
	}
	if len(s.Problems) > 0 || s.Torn != nil || s.Count != writers*each || len(seen) != writers*each {
		t.Fatalf("count %d, distinct %d, problems %v, torn %v", s.Count, len(seen), s.Problems, s.Torn)
	}
	for i, seq := range order {
		if seq != int64(i+1) {
			t.Fatalf("apply saw seq %d at position %d", seq, i)
		}
	}
}

// Every way of tampering with a line is found, at the right line.
func TestReadFindsTampering(t *testing.T) {
	_, good := build(t, 5)
	lines := strings.SplitAfter(string(good), "\n")[:5]
	join := func(ls ...string) string { return strings.Join(ls, "") }
	rehash := func(line string) string { // an edit whose author recomputed the line's own hash
		body := line[:strings.Index(line, hashKey)]
		sum := sha256.Sum256([]byte(body))
		return body + hashKey + hex.EncodeToString(sum[:]) + "\"}\n"
	}
	edited := strings.Replace(lines[2], `"n":2`, `"n":7`, 1)
	cases := []struct {
		name     string
		data     string
		line     int
		want     string
		problems int
	}{
		{"edited value", join(lines[0], lines[1], edited, lines[3], lines[4]), 3, "does not match its hash", 1},
		{"edited, hash recomputed", join(lines[0], lines[1], rehash(edited), lines[3], lines[4]), 4, "prev hash does not match line 3", 1},
		{"line removed", join(lines[0], lines[1], lines[3], lines[4]), 3, "sequence number 4 where 3 was expected", 1},
		{"lines swapped", join(lines[0], lines[2], lines[1], lines[3], lines[4]), 2, "sequence number 3 where 2 was expected", 3},
		{"line repeated", join(lines[0], lines[1], lines[1], lines[2], lines[3], lines[4]), 3, "sequence number 2 where 3 was expected", 1},
		{"first line removed", join(lines[1], lines[2], lines[3], lines[4]), 1, "sequence number 2 where 1 was expected", 1},
		{"blank line", join(lines[0], "\n", lines[1], lines[2], lines[3], lines[4]), 2, "not a JSON object", 1},
		{"zero bytes inside", join(lines[0], "\x00\x00\x00\n", lines[1], lines[2], lines[3], lines[4]), 2, "zero bytes", 1},
		{"foreign line", join(lines[0], `{"event":"x"}`+"\n", lines[1], lines[2], lines[3], lines[4]), 2, `"seq"`, 1},
		{"hash field dropped", join(lines[0], strings.Replace(lines[1], hashKey, `,"h":"`, 1), lines[2], lines[3], lines[4]), 2, `close with its "hash"`, 2},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, err := Read(strings.NewReader(c.data), nil)
			if err != nil {
				t.Fatal(err)
			}
			if len(s.Problems) != c.problems {
				t.Fatalf("problems %v, want %d", s.Problems, c.problems)
			}
			if p := s.Problems[0]; p.Line != c.line || !strings.Contains(p.Msg, c.want) {
				t.Errorf("first problem %q, want line %d with %q", p, c.line, c.want)
			}
			if s.Torn != nil {
				t.Errorf("torn %v, want none", s.Torn)
			}
		})
	}
}

// An interrupted append leaves a torn last line; it is told apart from
// tampering, and Open sets it aside and carries on from the last whole line.
func TestTornLastLine(t *testing.T) {
	_, good := build(t, 3)
	last := bytes.LastIndexByte(good[:len(good)-1], '\n') + 1
	cases := []struct {
		name string
		data []byte
	}{
		{"cut inside the last line", good[:len(good)-10]},
		{"cut just before the line end", good[:len(good)-1]},
		{"zero-filled tail", append(append([]byte{}, good[:last]...), make([]byte, 40)...)},
		{"zero-filled tail with a line end", append(append([]byte{}, good[:last]...), "\x00\x00\x00\n"...)},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			s, err := Read(bytes.NewReader(c.data), nil)
			if err != nil {
				t.Fatal(err)
			}
			if len(s.Problems) != 0 || s.Torn == nil || s.Torn.Line != 3 || s.Torn.Offset != int64(last) || s.Count != 2 {
				t.Fatalf("problems %v, torn %+v, count %d", s.Problems, s.Torn, s.Count)
			}
			path := filepath.Join(t.TempDir(), "ledger.jsonl")
			if err := os.WriteFile(path, c.data, 0o644); err != nil {
				t.Fatal(err)
			}
			l, err := Open(path, nil)
			if err != nil {
				t.Fatal(err)
			}
			set := l.TornSetAside()
			if set == nil || set.File != path+".torn-after-2" {
				t.Fatalf("set aside: %+v", set)
			}
			if saved, _ := os.ReadFile(set.File); !bytes.Equal(saved, c.data[last:]) {
				t.Errorf("side file holds %q, want %q", saved, c.data[last:])
			}
			ln, err := l.Append(note{"after", 1}, nil)
			l.Close()
			if err != nil || ln.Seq != 3 {
				t.Fatalf("append after recovery: seq %d, %v", ln.Seq, err)
			}
			s, _ = ReadFile(path, nil)
			if len(s.Problems) != 0 || s.Torn != nil || s.Count != 3 {
				t.Errorf("after recovery: %+v", s)
			}
		})
	}
}

// Open refuses a broken chain and says where it breaks; an empty or missing
// file is a new ledger.
func TestOpen(t *testing.T) {
	path, good := build(t, 4)
	lines := strings.SplitAfter(string(good), "\n")
	if err := os.WriteFile(path, []byte(lines[0]+lines[2]+lines[1]+lines[3]), 0o644); err != nil {
		t.Fatal(err)
	}
	_, err := Open(path, nil)
	var ce *ChainError
	if !errors.As(err, &ce) || !strings.Contains(err.Error(), "line 2: sequence number 3 where 2 was expected") {
		t.Errorf("swapped lines: %v", err)
	}
	for _, data := range []*[]byte{nil, {}} {
		p := filepath.Join(t.TempDir(), "ledger.jsonl")
		if data != nil {
			os.WriteFile(p, *data, 0o644)
		}
		l, err := Open(p, nil)
		if err != nil {
			t.Fatal(err)
		}
		if ln, err := l.Append(note{"first", 0}, nil); err != nil || ln.Seq != 1 || ln.Prev != Genesis {
			t.Errorf("first line: %+v %v", ln, err)
		}
		l.Close()
	}
}

func TestAppendRefuses(t *testing.T) {
	path := filepath.Join(t.TempDir(), "ledger.jsonl")
	l, err := Open(path, nil)
	if err != nil {
		t.Fatal(err)
	}
	cases := []struct {
		payload any
		want    string
	}{
		{map[string]int{"seq": 9}, `may not set "seq"`},
		{map[string]string{"hash": "x"}, `may not set "hash"`},
		{[]int{1}, "not a JSON object"},
		{"text", "not a JSON object"},
		{func() {}, "payload"},
	}
	for _, c := range cases {
		if _, err := l.Append(c.payload, nil); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%v: %v, want %q", c.payload, err, c.want)
		}
	}
	l.Close()
	if _, err := l.Append(note{"late", 0}, nil); err == nil || !strings.Contains(err.Error(), "closed") {
		t.Errorf("append after close: %v", err)
	}
}

func BenchmarkAppend(b *testing.B) {
	path := filepath.Join(b.TempDir(), "ledger.jsonl")
	l, err := Open(path, nil)
	if err != nil {
		b.Fatal(err)
	}
	defer l.Close()
	b.ReportAllocs()
	b.RunParallel(func(pb *testing.PB) {
		for pb.Next() {
			if _, err := l.Append(note{"bench", 1}, nil); err != nil {
				b.Fatal(err)
			}
		}
	})
}

func BenchmarkRead(b *testing.B) {
	_, data := build(b, 10000)
	b.SetBytes(int64(len(data)))
	b.ReportAllocs()
	for b.Loop() {
		s, err := Read(bytes.NewReader(data), nil)
		if err != nil || s.Count != 10000 {
			b.Fatal(err)
		}
	}
}

package ledger

import (
	"bytes"
	"os"
	"path/filepath"
	"testing"
)

// FuzzRead: any bytes are read without panicking; a clean result reads the
// same again, and its whole lines plus a fresh append still form one chain.
func FuzzRead(f *testing.F) {
	_, good := build(f, 3)
	f.Add(good)
	f.Add(good[:len(good)-5])
	f.Add(bytes.Replace(good, []byte(`"n":1`), []byte(`"n":9`), 1))
	f.Add([]byte("\n\n"))
	f.Add([]byte("\x00\x00\x00"))
	f.Add([]byte(`{"seq":1,"prev":"` + Genesis + `","hash":"` + Genesis + `"}` + "\n"))
	f.Add([]byte(`{"seq":1}` + "\n" + `not json`))
	f.Fuzz(func(t *testing.T, data []byte) {
		s, err := Read(bytes.NewReader(data), nil)
		if err != nil {
			t.Fatal(err)
		}
		if s.Size > int64(len(data)) || (s.Torn != nil && s.Torn.Offset != s.Size) {
			t.Fatalf("size %d, torn %+v for %d bytes", s.Size, s.Torn, len(data))
		}
		if len(s.Problems) > 0 {
			return
		}
		path := filepath.Join(t.TempDir(), "ledger.jsonl")
		if err := os.WriteFile(path, data, 0o644); err != nil {
			t.Fatal(err)
		}
		l, err := Open(path, nil)
		if err != nil {
			t.Fatal(err)
		}
		if ln, err := l.Append(note{"fuzz", 1}, nil); err != nil || ln.Seq != s.Last.Seq+1 {
			t.Fatalf("append: %+v %v", ln, err)
		}
		l.Close()
		again, err := ReadFile(path, nil)
		if err != nil || len(again.Problems) > 0 || again.Torn != nil || again.Count != s.Count+1 {
			t.Fatalf("after append: %+v %v", again, err)
		}
	})
}

package watch

import (
	"bytes"
	"context"
	"crypto/sha256"
	"encoding/hex"
	"fmt"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"time"

	"github.com/fsnotify/fsnotify"

	"lotgate/examples/synth"
	"lotgate/pipeline"
)

// runOnce runs a watcher over the files until it is idle.
func runOnce(t *testing.T, files map[string][]byte) (inbox, out string, sum Summary) {
	t.Helper()
	dir := t.TempDir()
	inbox, out = filepath.Join(dir, "inbox"), filepath.Join(dir, "out")
	pipePath := filepath.Join(dir, "p.hcl")
	if err := os.WriteFile(pipePath, []byte(synth.SmallPipeline), 0o644); err != nil {
		t.Fatal(err)
	}
	p, err := pipeline.Load(pipePath)
	if err != nil {
		t.Fatal(err)
	}
	if err := os.Mkdir(inbox, 0o755); err != nil {
		t.Fatal(err)
	}
	for name, data := range files {
		if err := os.WriteFile(filepath.Join(inbox, name), data, 0o644); err != nil {
			t.Fatal(err)
		}
	}
	w, err := New(Options{Pipeline: p, PipelinePath: pipePath, Inbox: inbox, Out: out, Workers: 2,
		Settle: 100 * time.Millisecond, IncompleteAfter: 200 * time.Millisecond, UntilIdle: true})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	sum, err = w.Run(ctx)
	if err != nil {
		t.Fatal(err)
	}
	return inbox, out, sum
}

func copyDir(t *testing.T, src string) string {
	t.Helper()
	dst := t.TempDir()
	if err := os.CopyFS(dst, os.DirFS(src)); err != nil {
		t.Fatal(err)
	}
	return dst
}

// Verify agrees with a clean run and finds every kind of damage to the
// folder afterwards.
func TestVerify(t *testing.T) {
	files := map[string][]byte{"a.csv": synth.Small(1), "b.csv": synth.Small(2), "c.csv": synth.Small(3), "a-again.csv": synth.Small(1), "bad.csv": []byte("not, a chromatogram\n")}
	_, out, sum := runOnce(t, files)
	if sum.Certified != 3 || sum.Duplicates != 1 || sum.Quarantined != 1 || sum.Unfinished != 0 {
		t.Fatalf("summary %+v", sum)
	}
	if r, err := Verify(t.TempDir()); err == nil {
		t.Errorf("a folder without a ledger verified: %+v", r)
	}
	r, err := Verify(out)
	if err != nil {
		t.Fatal(err)
	}
	if len(r.Problems) > 0 || r.Certified != 3 || r.Duplicates != 1 || r.Quarantined != 1 || r.OutputsChecked != 3 || r.InputsChecked != 4 {
		t.Fatalf("clean folder: %+v", r)
	}
	find := func(dir, suffix string) string {
		m, _ := filepath.Glob(filepath.Join(dir, "*"+suffix))
		if len(m) == 0 {
			t.Fatalf("no *%s in %s", suffix, dir)
		}
		return m[0]
	}
	cases := []struct {
		name   string
		damage func(dir string)
		want   string
	}{
		{"document edited", func(d string) {
			p := find(d, ".json")
			b, _ := os.ReadFile(p)
			os.WriteFile(p, bytes.Replace(b, []byte(`"verdict": "pass"`), []byte(`"verdict": "fail"`), 1), 0o644)
		}, "does not have the SHA-256 the ledger recorded"},
		{"document removed", func(d string) { os.Remove(find(d, ".json")) }, "no such file"},
		{"archived input edited", func(d string) { os.WriteFile(find(filepath.Join(d, "archive"), ".csv"), synth.Small(9), 0o644) }, "no longer has the SHA-256"},
		{"archived input removed", func(d string) { os.Remove(find(filepath.Join(d, "archive"), ".csv")) }, "archived input"},
		{"reason removed", func(d string) { os.Remove(find(filepath.Join(d, "quarantine"), ".reason.txt")) }, "quarantined"},
		{"ledger line edited", func(d string) {
			p := filepath.Join(d, LedgerFile)
			b, _ := os.ReadFile(p)
			os.WriteFile(p, bytes.Replace(b, []byte(`"verdict":"pass"`), []byte(`"verdict":"fail"`), 1), 0o644)
		}, "the line was changed after it was written"},
		{"ledger rewritten with a consistent chain", func(d string) {
			p := filepath.Join(d, LedgerFile)
			b, _ := os.ReadFile(p)
			os.WriteFile(p, rechain(bytes.Replace(b, []byte(`"file":"b.csv"`), []byte(`"file":"z.csv"`), 1)), 0o644)
		}, "names ledger head"},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			d := copyDir(t, out)
			c.damage(d)
			r, err := Verify(d)
			if err != nil {
				t.Fatal(err)
			}
			if len(r.Problems) == 0 || !strings.Contains(strings.Join(r.Problems, "\n"), c.want) {
				t.Errorf("problems %q, want one with %q", r.Problems, c.want)
			}
		})
	}
}

// rechain recomputes every sequence hash of a ledger as a forger would:
// the SHA-256 (crypto/sha256; common practice) of the bytes before
// `,"hash":"`, chained through prev.
func rechain(data []byte) []byte {
	var out bytes.Buffer
	prev := strings.Repeat("0", 64)
	for _, line := range strings.Split(strings.TrimSuffix(string(data), "\n"), "\n") {
		i := strings.Index(line, `,"hash":"`)
		j := strings.Index(line, `"prev":"`) + len(`"prev":"`)
		body := line[:j] + prev + line[j+64:i]
		sum := sha256.Sum256([]byte(body))
		prev = hex.EncodeToString(sum[:])
		fmt.Fprintf(&out, "%s,\"hash\":\"%s\"}\n", body, prev)
	}
	return out.Bytes()
}

// Events are hints: when the event source reports an error (a queue
// overflow, say), the inbox is listed at once, and the files no event
// announced are found.
func TestOverflowListsAtOnce(t *testing.T) {
	dir := t.TempDir()
	inbox, out, pipePath := filepath.Join(dir, "inbox"), filepath.Join(dir, "out"), filepath.Join(dir, "p.hcl")
	os.Mkdir(inbox, 0o755)
	os.WriteFile(pipePath, []byte(synth.SmallPipeline), 0o644)
	p, err := pipeline.Load(pipePath)
	if err != nil {
		t.Fatal(err)
	}
	w, err := New(Options{Pipeline: p, Inbox: inbox, Out: out, Settle: 50 * time.Millisecond, Rescan: time.Hour})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	events, errs := make(chan fsnotify.Event), make(chan error, 1)
	ctx, cancel := context.WithCancel(context.Background())
	done := make(chan Summary)
	go func() {
		sum, err := w.serve(ctx, events, errs)
		if err != nil {
			t.Error(err)
		}
		done <- sum
	}()
	time.Sleep(100 * time.Millisecond) // the first listing has found nothing; no rescan comes for an hour
	for i := range 3 {
		os.WriteFile(filepath.Join(inbox, fmt.Sprintf("missed-%d.csv", i)), synth.Small(i), 0o644)
	}
	errs <- fsnotify.ErrEventOverflow
	for deadline := time.Now().Add(30 * time.Second); ; time.Sleep(10 * time.Millisecond) {
		if c, _ := w.st.snapshot(); c.Certified == 3 {
			break
		}
		if time.Now().After(deadline) {
			t.Fatal("the files no event announced were not found")
		}
	}
	cancel()
	if sum := <-done; sum.FoundByListing != 3 || sum.FoundByEvent != 0 {
		t.Errorf("summary %+v, want all 3 found by the listing", sum)
	}
}

// More files than the pending limit: the rest are picked up by later
// listings as room frees, none is lost.
func TestPendingLimit(t *testing.T) {
	files := map[string][]byte{}
	for i := range 12 {
		files[fmt.Sprintf("f%02d.csv", i)] = synth.Small(i)
	}
	dir := t.TempDir()
	inbox, out, pipePath := filepath.Join(dir, "inbox"), filepath.Join(dir, "out"), filepath.Join(dir, "p.hcl")
	os.Mkdir(inbox, 0o755)
	os.WriteFile(pipePath, []byte(synth.SmallPipeline), 0o644)
	for name, data := range files {
		os.WriteFile(filepath.Join(inbox, name), data, 0o644)
	}
	p, err := pipeline.Load(pipePath)
	if err != nil {
		t.Fatal(err)
	}
	w, err := New(Options{Pipeline: p, Inbox: inbox, Out: out, Settle: 30 * time.Millisecond, Rescan: 50 * time.Millisecond,
		MaxPending: 5, UntilIdle: true, Poll: true})
	if err != nil {
		t.Fatal(err)
	}
	defer w.Close()
	ctx, cancel := context.WithTimeout(context.Background(), 30*time.Second)
	defer cancel()
	sum, err := w.Run(ctx)
	if err != nil || sum.Certified+sum.Quarantined != 12 || sum.Unfinished != 0 || sum.FoundByListing != 12 {
		t.Errorf("summary %+v, %v; want all 12 finished", sum, err)
	}
}

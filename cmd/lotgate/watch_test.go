//go:build unix

package main

import (
	"bytes"
	"crypto/sha256"
	"encoding/hex"
	"encoding/json"
	"errors"
	"fmt"
	"io/fs"
	"maps"
	"math/rand/v2"
	"os"
	"os/exec"
	"path/filepath"
	"regexp"
	"slices"
	"strconv"
	"strings"
	"sync"
	"sync/atomic"
	"syscall"
	"testing"
	"time"

	"lotgate/examples/synth"
	"lotgate/pipeline/watch"
)

// LOTGATE_STRESS=1 runs the watcher tests at full scale (500-file bursts,
// 48 crashes, 2,000 waiting files, a 5,000-file burst); the default run
// does every test with smaller counts.
var stress = os.Getenv("LOTGATE_STRESS") == "1"

func scale(normal, heavy int) int {
	if stress {
		return heavy
	}
	return normal
}

// The watcher tests build the real binary once and run it against
// temporary folders.
func TestWatch(t *testing.T) {
	bin := filepath.Join(t.TempDir(), "lotgate")
	if out, err := exec.Command("go", "build", "-o", bin, ".").CombinedOutput(); err != nil {
		t.Fatalf("go build: %v\n%s", err, out)
	}
	tests := []struct {
		name string
		fn   func(*testing.T, string)
	}{
		{"burst", testBurst},
		{"slow-writer", testSlowWriter},
		{"crash", testCrash},
		{"torn-ledger", testTornLedger},
		{"waiting", testWaiting},
		{"bad-files", testBadFiles},
		{"names-links-duplicates", testNamesLinksDuplicates},
		{"polling", testPolling},
		{"lock-and-pipeline-edit", testLockAndPipelineEdit},
		{"signals", testSignals},
		{"memory", testMemory},
		{"demo", testDemoWatch},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) { tc.fn(t, bin) })
	}
}

// digest is the SHA-256 of b, computed here independently of the watcher
// (crypto/sha256, FIPS 180-4; common practice).
func digest(b []byte) string {
	sum := sha256.Sum256(b)
	return hex.EncodeToString(sum[:])
}

// fixture is one watcher's folders.
type fixture struct {
	t                      *testing.T
	bin, dir, inbox, out   string
	pipe                   string
	next                   int // the next synth index
	dropped                map[string][]byte
	settle, incompleteWait string
}

func newFixture(t *testing.T, bin, pipelineSrc string) *fixture {
	t.Helper()
	dir := t.TempDir()
	f := &fixture{t: t, bin: bin, dir: dir, inbox: filepath.Join(dir, "inbox"), out: filepath.Join(dir, "out"),
		pipe: filepath.Join(dir, "method", "p.hcl"), dropped: map[string][]byte{}, settle: "200ms", incompleteWait: "1s"}
	for _, d := range []string{f.inbox, filepath.Dir(f.pipe)} {
		if err := os.MkdirAll(d, 0o755); err != nil {
			t.Fatal(err)
		}
	}
	if pipelineSrc != "" {
		if err := os.WriteFile(f.pipe, []byte(pipelineSrc), 0o644); err != nil {
			t.Fatal(err)
		}
	}
	return f
}

// drop writes a file straight into the inbox, as an instrument PC would.
func (f *fixture) drop(name string, data []byte) {
	f.t.Helper()
	if err := os.WriteFile(filepath.Join(f.inbox, name), data, 0o644); err != nil {
		f.t.Fatal(err)
	}
	f.dropped[name] = data
}

// dropNew drops n new unique files named PREFIX-i.csv.
func (f *fixture) dropNew(prefix string, n int) {
	for range n {
		f.drop(fmt.Sprintf("%s-%05d.csv", prefix, f.next), synth.Small(f.next))
		f.next++
	}
}

// proc is a running watcher.
type proc struct {
	cmd            *exec.Cmd
	stdout, stderr *syncBuffer
	done           chan struct{}
	err            error
	hwm            atomic.Int64 // peak RSS in KiB, sampled
}

type syncBuffer struct {
	mu sync.Mutex
	b  bytes.Buffer
}

func (s *syncBuffer) Write(p []byte) (int, error) {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.Write(p)
}

func (s *syncBuffer) String() string {
	s.mu.Lock()
	defer s.mu.Unlock()
	return s.b.String()
}

func (f *fixture) start(env []string, extra ...string) *proc {
	f.t.Helper()
	args := append([]string{"watch", "-p", f.pipe, "--inbox", f.inbox, "-o", f.out, "--settle", f.settle,
		"--rescan", "1s", "--incomplete-after", f.incompleteWait, "--workers", "2", "--stop-timeout", "20s"}, extra...)
	p := &proc{cmd: exec.Command(f.bin, args...), stdout: &syncBuffer{}, stderr: &syncBuffer{}, done: make(chan struct{})}
	p.cmd.Env = append(append(os.Environ(), "SOURCE_DATE_EPOCH="+epoch), env...)
	p.cmd.Stdout, p.cmd.Stderr = p.stdout, p.stderr
	if err := p.cmd.Start(); err != nil {
		f.t.Fatal(err)
	}
	go func() { p.err = p.cmd.Wait(); close(p.done) }()
	go p.sampleRSS()
	f.t.Cleanup(func() { // a failed test leaves no watcher behind
		p.cmd.Process.Kill()
		<-p.done
	})
	return p
}

// wait returns the exit status (-1 when killed by a signal).
func (p *proc) wait(t *testing.T, timeout time.Duration) int {
	t.Helper()
	select {
	case <-p.done:
	case <-time.After(timeout):
		p.cmd.Process.Kill()
		<-p.done
		t.Fatalf("watcher still running after %v\nstderr:\n%s", timeout, tail(p.stderr.String(), 3000))
	}
	var ee *exec.ExitError
	if errors.As(p.err, &ee) {
		return ee.ExitCode()
	}
	if p.err != nil {
		t.Fatal(p.err)
	}
	return 0
}

func tail(s string, n int) string {
	if len(s) > n {
		return "…" + s[len(s)-n:]
	}
	return s
}

// stop sends SIGTERM and expects a clean stop.
func (f *fixture) stop(p *proc) {
	f.t.Helper()
	p.cmd.Process.Signal(syscall.SIGTERM)
	if code := p.wait(f.t, 60*time.Second); code != 0 {
		f.t.Fatalf("stop: exit %d\n%s", code, tail(p.stderr.String(), 3000))
	}
}

// runIdle runs a watcher until it is idle and expects exit status 0.
func (f *fixture) runIdle(extra ...string) *proc {
	f.t.Helper()
	p := f.start(nil, append(extra, "--until-idle")...)
	if code := p.wait(f.t, 10*time.Minute); code != 0 {
		f.t.Fatalf("exit %d\nstdout: %s\nstderr:\n%s", code, p.stdout.String(), tail(p.stderr.String(), 4000))
	}
	return p
}

// entry is a ledger line as the tests read it.
type entry struct {
	Seq int64 `json:"seq"`
	watch.Entry
}

// entries reads the whole lines of the ledger.
func (f *fixture) entries() []entry {
	f.t.Helper()
	b, err := os.ReadFile(filepath.Join(f.out, watch.LedgerFile))
	if errors.Is(err, fs.ErrNotExist) {
		return nil
	}
	if err != nil {
		f.t.Fatal(err)
	}
	var es []entry
	for len(b) > 0 {
		i := bytes.IndexByte(b, '\n')
		if i < 0 {
			break
		}
		var e entry
		if err := json.Unmarshal(b[:i], &e); err != nil {
			f.t.Fatalf("ledger line %d: %v", len(es)+1, err)
		}
		es = append(es, e)
		b = b[i+1:]
	}
	return es
}

func (f *fixture) count(event string) int {
	n := 0
	for _, e := range f.entries() {
		if e.Event == event {
			n++
		}
	}
	return n
}

func (f *fixture) waitCount(p *proc, event string, n int, timeout time.Duration) {
	f.t.Helper()
	f.waitFor(p, fmt.Sprintf("%d %s entries", n, event), func() bool { return f.count(event) >= n }, timeout)
}

// waitDone waits until n items have ended: archived or quarantined.
func (f *fixture) waitDone(p *proc, n int, timeout time.Duration) {
	f.t.Helper()
	f.waitFor(p, fmt.Sprintf("%d finished items", n), func() bool {
		return f.count(watch.EvArchived)+f.count(watch.EvQuarantined) >= n
	}, timeout)
}

func (f *fixture) waitFor(p *proc, what string, cond func() bool, timeout time.Duration) {
	f.t.Helper()
	deadline := time.Now().Add(timeout)
	for !cond() {
		select {
		case <-p.done:
			f.t.Fatalf("watcher exited while waiting for %s\n%s", what, tail(p.stderr.String(), 3000))
		default:
		}
		if time.Now().After(deadline) {
			f.t.Fatalf("no %s after %v\n%s", what, timeout, tail(p.stderr.String(), 3000))
		}
		time.Sleep(50 * time.Millisecond)
	}
}

// verify runs `lotgate ledger verify` on the output folder.
func (f *fixture) verify() (int, string) {
	f.t.Helper()
	out, err := exec.Command(f.bin, "ledger", "verify", f.out).CombinedOutput()
	var ee *exec.ExitError
	if errors.As(err, &ee) {
		return ee.ExitCode(), string(out)
	}
	if err != nil {
		f.t.Fatal(err)
	}
	return 0, string(out)
}

func (f *fixture) mustVerify() {
	f.t.Helper()
	if code, out := f.verify(); code != 0 {
		f.t.Fatalf("ledger verify: exit %d\n%s", code, tail(out, 4000))
	}
}

// itemView is how one item ended, from the ledger.
type itemView struct {
	id                int64
	file, sha, state  string
	of                int64
	verdict           string
	outputs           []watch.Output
	received, reportT time.Time
}

func (f *fixture) items() map[int64]*itemView {
	items := map[int64]*itemView{}
	for _, e := range f.entries() {
		at, _ := time.Parse(time.RFC3339Nano, e.Time)
		if e.Event == watch.EvReceived {
			items[e.Seq] = &itemView{id: e.Seq, file: e.File, sha: e.SHA256, state: e.Event, received: at}
			continue
		}
		it := items[e.Item]
		if it == nil {
			continue
		}
		it.state = e.Event
		switch e.Event {
		case watch.EvChanged:
			it.sha = e.SHA256
		case watch.EvDuplicate:
			it.of = e.Of
		case watch.EvComputed:
			it.verdict = e.Verdict
		case watch.EvReported:
			it.outputs, it.reportT = e.Outputs, at
		}
	}
	return items
}

// checkExactlyOnce checks the end state against what was dropped: every
// dropped file ended exactly once (certified, duplicate or quarantined;
// earlier attempts withdrawn), every distinct good content was certified
// exactly once, the inbox and work folder are empty, no temporary file is
// left anywhere, and the ledger verifies. It returns the certified items.
func (f *fixture) checkExactlyOnce(bad map[string]bool) map[string]*itemView {
	t := f.t
	t.Helper()
	f.mustVerify()
	byFile := map[string][]*itemView{}
	certified := map[string]*itemView{}
	for _, it := range f.items() {
		switch it.state {
		case watch.EvArchived, watch.EvQuarantined:
			byFile[it.file] = append(byFile[it.file], it)
		case watch.EvWithdrawn:
		default:
			t.Errorf("item %d (%s) is unfinished: %s", it.id, it.file, it.state)
		}
		if it.state == watch.EvArchived && it.of == 0 {
			if prev := certified[it.sha]; prev != nil {
				t.Errorf("content %s certified twice: items %d and %d", it.sha[:12], prev.id, it.id)
			}
			certified[it.sha] = it
		}
	}
	for name, data := range f.dropped {
		its := byFile[name]
		if len(its) != 1 {
			t.Errorf("%q ended %d times, want once", name, len(its))
			continue
		}
		it := its[0]
		switch {
		case bad[name]:
			if it.state != watch.EvQuarantined {
				t.Errorf("%q: %s, want quarantined", name, it.state)
			}
		case it.state != watch.EvArchived:
			t.Errorf("%q: %s, want archived", name, it.state)
		case it.sha != digest(data):
			t.Errorf("%q: ledger digest %s, but the file's SHA-256 is %s", name, it.sha, digest(data))
		case certified[it.sha] == nil:
			t.Errorf("%q: its content was never certified", name)
		case it.of != 0 && it.of != certified[it.sha].id:
			t.Errorf("%q: duplicate of item %d, but item %d certified its content", name, it.of, certified[it.sha].id)
		}
	}
	for _, d := range []string{f.inbox, filepath.Join(f.out, "work")} {
		entries, _ := os.ReadDir(d)
		for _, e := range entries {
			if d == f.inbox && strings.HasPrefix(e.Name(), ".") {
				continue
			}
			t.Errorf("%s still holds %q", d, e.Name())
		}
	}
	filepath.WalkDir(f.out, func(p string, d fs.DirEntry, err error) error {
		if err == nil && strings.HasSuffix(d.Name(), ".tmp") {
			t.Errorf("temporary file left: %s", p)
		}
		return nil
	})
	return certified
}

// jsonString writes s as the record writes strings.
func jsonString(s string) string {
	var b bytes.Buffer
	enc := json.NewEncoder(&b)
	enc.SetEscapeHTML(false)
	enc.Encode(s)
	return strings.TrimSuffix(b.String(), "\n")
}

var ledgerHeadLine = regexp.MustCompile(`,\n\s*"ledger_head": "[0-9]+:[0-9a-f]{64}"`)

// check runs `lotgate run` on every distinct content dropped (but the
// names in bad) under the same pipeline and SOURCE_DATE_EPOCH, and then
// checks the watcher's end state against it: a file run refuses must be
// quarantined (as must the names in bad), every other file processed
// exactly once (see checkExactlyOnce), and every certified record must be
// run's record byte for byte, but for the ledger head the watcher adds.
// It returns the certified items by content digest.
func (f *fixture) check(bad map[string]bool) map[string]*itemView {
	t := f.t
	t.Helper()
	ref, in := filepath.Join(f.dir, "ref"), filepath.Join(f.dir, "ref-in")
	os.RemoveAll(ref)
	os.RemoveAll(in)
	os.MkdirAll(in, 0o755)
	args := []string{"run", "-p", f.pipe, "-o", ref}
	stems := map[string]string{}
	for name, data := range f.dropped {
		if _, ok := stems[digest(data)]; ok || bad[name] {
			continue
		}
		local := fmt.Sprintf("in-%05d.csv", len(stems))
		os.WriteFile(filepath.Join(in, local), data, 0o644)
		stems[digest(data)] = strings.TrimSuffix(local, ".csv")
		args = append(args, filepath.Join(in, local))
	}
	cmd := exec.Command(f.bin, args...)
	cmd.Env = append(os.Environ(), "SOURCE_DATE_EPOCH="+epoch)
	out, _ := cmd.CombinedOutput()
	expectBad := map[string]bool{}
	refused := 0
	for name, data := range f.dropped {
		if _, err := os.Stat(filepath.Join(ref, stems[digest(data)]+".json")); bad[name] || err != nil {
			expectBad[name] = true
			if !bad[name] {
				refused++
			}
		}
	}
	if refused > 0 {
		var errs []string
		for _, l := range strings.Split(string(out), "\n") {
			if strings.Contains(l, "error") {
				errs = append(errs, l)
			}
		}
		t.Logf("lotgate run refused %d of the synthetic files; the watcher must quarantine them too:\n%s", refused, strings.Join(errs, "\n"))
	}
	certified := f.checkExactlyOnce(expectBad)
	for sha, it := range certified {
		want, err := os.ReadFile(filepath.Join(ref, stems[sha]+".json"))
		if err != nil {
			t.Errorf("item %d (%s): %v", it.id, it.file, err)
			continue
		}
		// Bring the reference's input name in line with the watcher's.
		want = bytes.Replace(want, []byte(`"input_file": "`+stems[sha]+`.csv"`), []byte(`"input_file": `+jsonString(it.file)), 1)
		got, err := os.ReadFile(filepath.Join(f.out, it.outputs[0].File))
		if err != nil {
			t.Errorf("item %d: %v", it.id, err)
			continue
		}
		if !ledgerHeadLine.Match(got) {
			t.Errorf("item %d (%s): the record names no ledger head", it.id, it.file)
		}
		if got = ledgerHeadLine.ReplaceAll(got, nil); !bytes.Equal(got, want) {
			t.Errorf("item %d (%s): record differs from lotgate run's", it.id, it.file)
		}
	}
	return certified
}

// figures logs throughput, the latency from a file being taken (found
// settled and received) to its documents being reported, and the
// watcher's peak memory.
func (f *fixture) figures(label string, p *proc) {
	var first, last time.Time
	var lat []time.Duration
	for _, it := range f.items() {
		if it.reportT.IsZero() {
			continue
		}
		if first.IsZero() || it.received.Before(first) {
			first = it.received
		}
		if it.reportT.After(last) {
			last = it.reportT
		}
		lat = append(lat, it.reportT.Sub(it.received))
	}
	if len(lat) == 0 {
		return
	}
	slices.Sort(lat)
	pct := func(q float64) time.Duration { return lat[int(q*float64(len(lat)-1))] }
	f.t.Logf("%s: %d files certified in %v = %.0f files/s; received→reported latency p50 %v, p95 %v, max %v; peak RSS %d MiB",
		label, len(lat), last.Sub(first).Round(time.Millisecond), float64(len(lat))/last.Sub(first).Seconds(),
		pct(0.5).Round(time.Microsecond), pct(0.95).Round(time.Microsecond), lat[len(lat)-1].Round(time.Microsecond), maxRSS(p)>>10)
}

// maxRSS is the process's peak resident set size in KiB, as last sampled
// from /proc (Linux; 0 elsewhere). The rusage of a child cannot serve: on
// Linux it starts from the parent's peak at fork.
func maxRSS(p *proc) int64 { return p.hwm.Load() }

// sampleRSS keeps p.hwm up to date while the process runs.
func (p *proc) sampleRSS() {
	status := fmt.Sprintf("/proc/%d/status", p.cmd.Process.Pid)
	for {
		if b, err := os.ReadFile(status); err == nil {
			if _, v, ok := strings.Cut(string(b), "VmHWM:"); ok {
				if kb, err := strconv.ParseInt(strings.TrimSpace(strings.TrimSuffix(strings.Fields(v)[0], "kB")), 10, 64); err == nil {
					p.hwm.Store(kb)
				}
			}
		}
		select {
		case <-p.done:
			return
		case <-time.After(100 * time.Millisecond):
		}
	}
}

func testBurst(t *testing.T, bin string) {
	n, bursts := scale(120, 500), 4
	f := newFixture(t, bin, synth.SmallPipeline)
	p := f.start(nil)
	for b := range bursts {
		f.dropNew(fmt.Sprintf("burst%d", b), n/bursts)
		time.Sleep(300 * time.Millisecond)
	}
	f.waitDone(p, n, 5*time.Minute)
	f.stop(p)
	f.check(nil)
	f.figures("burst", p)
}

// A file written in chunks, with one pause longer than the settle time in
// the middle of a line, is taken once, whole, after its last chunk.
func testSlowWriter(t *testing.T, bin string) {
	f := newFixture(t, bin, synth.SmallPipeline)
	f.settle, f.incompleteWait = "1s", "20s"
	p := f.start(nil)
	data := synth.Small(1)
	fh, err := os.Create(filepath.Join(f.inbox, "slow.csv"))
	if err != nil {
		t.Fatal(err)
	}
	const chunks = 8
	var lastWrite time.Time
	from := 0
	for k := range chunks {
		// Every chunk ends inside a line, so that however long a pause
		// lasts, only the settle time and the completeness check decide.
		to := len(data) * (k + 1) / chunks
		for to < len(data) && data[to-1] == '\n' {
			to++
		}
		if _, err := fh.Write(data[from:to]); err != nil {
			t.Fatal(err)
		}
		lastWrite = time.Now()
		from = to
		pause := 300 * time.Millisecond
		if k == chunks/2 {
			pause = 1800 * time.Millisecond
		}
		if k < chunks-1 {
			time.Sleep(pause)
		}
	}
	fh.Close()
	f.dropped["slow.csv"] = data
	f.waitDone(p, 1, time.Minute)
	f.stop(p)
	f.check(nil)
	var received []entry
	for _, e := range f.entries() {
		if e.Event == watch.EvReceived {
			received = append(received, e)
		}
	}
	if len(received) != 1 || *received[0].Size != int64(len(data)) || received[0].SHA256 != digest(data) {
		t.Fatalf("received entries %+v, want one of the whole file (%d bytes)", received, len(data))
	}
	if at, _ := time.Parse(time.RFC3339Nano, received[0].Time); at.Before(lastWrite.Add(time.Second)) {
		t.Errorf("taken at %v, before the last chunk (%v) had settled for 1s", at, lastWrite)
	}
}

// kill -9 at each state change and at random moments, with new files
// arriving between runs: in the end every file is processed exactly once,
// the records are those of a run without crashes, no document is partial,
// no temporary file is left, and the ledger verifies after every crash.
func testCrash(t *testing.T, bin string) {
	kills := scale(12, 48)
	f := newFixture(t, bin, synth.SmallPipeline)
	rng := rand.New(rand.NewPCG(2026, 12))
	bad := map[string]bool{}
	events := []string{watch.EvReceived, watch.EvClaimed, watch.EvComputed, watch.EvReported, watch.EvArchived,
		watch.EvDuplicate, watch.EvRejected, watch.EvQuarantined}
	f.dropNew("first", scale(8, 24))
	fired, random, midway := 0, 0, 0
	for k := range kills {
		f.dropNew(fmt.Sprintf("round%02d", k), 3)
		f.drop(fmt.Sprintf("dup-%02d.csv", k), synth.Small(rng.IntN(f.next-1)))
		name := fmt.Sprintf("bad-%02d.csv", k)
		f.drop(name, []byte(fmt.Sprintf("time,signal\n0,1\n1,NaN\n# round %d\n", k)))
		bad[name] = true
		var p *proc
		if k%2 == 0 {
			spec := fmt.Sprintf("%s:%d", events[(k/2)%len(events)], 1+rng.IntN(2))
			p = f.start([]string{"LOTGATE_WATCH_CRASH_AFTER=" + spec}, "--until-idle")
			if code := p.wait(t, 2*time.Minute); code == -1 {
				fired++
			} else if code != 0 {
				t.Fatalf("crash %d (%s): exit %d\n%s", k, spec, code, tail(p.stderr.String(), 3000))
			}
		} else {
			// A random moment while the round's files are processed: after
			// a random number of new ledger entries, plus up to 2 ms.
			before := len(f.entries())
			target := before + 2 + rng.IntN(24)
			p = f.start(nil, "--until-idle")
			for deadline := time.Now().Add(10 * time.Second); len(f.entries()) < target && time.Now().Before(deadline); {
				select {
				case <-p.done:
				case <-time.After(time.Millisecond):
					continue
				}
				break
			}
			time.Sleep(time.Duration(rng.IntN(2000)) * time.Microsecond)
			p.cmd.Process.Kill()
			if p.wait(t, time.Minute) == -1 {
				random++
				midway += len(f.entries()) - before - 1
			}
		}
		f.mustVerify()
		docs, _ := filepath.Glob(filepath.Join(f.out, "*.json"))
		for _, d := range docs {
			if b, _ := os.ReadFile(d); !json.Valid(b) {
				t.Fatalf("after crash %d: %s is a partial document", k, d)
			}
		}
	}
	f.runIdle()
	certified := f.check(bad)
	t.Logf("crash: %d kills: %d right after a chosen state change, %d at random moments (%d ledger entries written before them); %d files, %d certified, %d attempts withdrawn and redone",
		kills, fired, random, midway, len(f.dropped), len(certified), f.count(watch.EvWithdrawn))
	if fired < kills/4 || random < kills/4 {
		t.Errorf("only %d kills at a state change and %d at random moments hit a running watcher", fired, random)
	}
}

// Damaged ledgers: a torn last line is set aside and the work it announced
// redone; an empty ledger beside a history, an entry out of sequence and a
// removed entry make the watcher refuse to start, loudly, and leave the
// inbox alone.
func testTornLedger(t *testing.T, bin string) {
	f := newFixture(t, bin, synth.SmallPipeline)
	f.dropNew("a", 4)
	p := f.start([]string{"LOTGATE_WATCH_CRASH_AFTER=archived:2"}, "--workers", "1", "--until-idle")
	if code := p.wait(t, time.Minute); code != -1 {
		t.Fatalf("the crash did not happen: exit %d", code)
	}
	ledgerPath := filepath.Join(f.out, watch.LedgerFile)
	b, _ := os.ReadFile(ledgerPath)
	if !bytes.Contains(b[bytes.LastIndexByte(b[:len(b)-1], '\n'):], []byte(`"event":"archived"`)) {
		t.Fatal("the ledger does not end with the archived entry")
	}
	os.WriteFile(ledgerPath, b[:len(b)-25], 0o644) // a power cut in the middle of that line
	f.dropNew("b", 2)
	p = f.runIdle()
	if !strings.Contains(p.stderr.String(), "torn") {
		t.Errorf("the torn line was not reported:\n%s", tail(p.stderr.String(), 2000))
	}
	if side, _ := filepath.Glob(ledgerPath + ".torn-after-*"); len(side) != 1 {
		t.Errorf("torn line set aside in %v, want one file", side)
	}
	f.check(nil)

	good, _ := os.ReadFile(ledgerPath)
	lines := strings.SplitAfter(string(good), "\n")
	refuse := []struct {
		name   string
		ledger string
		want   string
	}{
		{"zero-length ledger beside a history", "", "is empty or missing, but the folders already hold"},
		{"entry out of sequence", lines[0] + lines[1] + lines[3] + lines[2] + strings.Join(lines[4:], ""), "line 3: sequence number 4 where 3 was expected"},
		{"entry removed", lines[0] + lines[1] + lines[2] + strings.Join(lines[4:], ""), "line 4: sequence number 5 where 4 was expected"},
	}
	f.dropNew("waiting", 1)
	waiting := fmt.Sprintf("waiting-%05d.csv", f.next-1)
	for _, c := range refuse {
		os.WriteFile(ledgerPath, []byte(c.ledger), 0o644)
		p := f.start(nil, "--until-idle")
		if code := p.wait(t, time.Minute); code != exitUsage || !strings.Contains(p.stderr.String(), c.want) {
			t.Errorf("%s: exit %d, stderr %q; want %d and %q", c.name, code, tail(p.stderr.String(), 1000), exitUsage, c.want)
		}
		if _, err := os.Stat(filepath.Join(f.inbox, waiting)); err != nil {
			t.Errorf("%s: the waiting file was touched: %v", c.name, err)
		}
		if c.ledger != "" {
			if code, out := f.verify(); code != exitVerdict || !strings.Contains(out, c.want) {
				t.Errorf("%s: ledger verify exit %d: %s", c.name, code, out)
			}
		}
	}
	// A zero-length ledger in fresh folders is a new ledger.
	g := newFixture(t, bin, synth.SmallPipeline)
	os.MkdirAll(g.out, 0o755)
	os.WriteFile(filepath.Join(g.out, watch.LedgerFile), nil, 0o644)
	g.dropNew("fresh", 1)
	g.runIdle()
	g.check(nil)
}

// Files already waiting before the watcher starts are all found by the
// first listing, without a single event.
func testWaiting(t *testing.T, bin string) {
	n := scale(300, 2000)
	f := newFixture(t, bin, synth.SmallPipeline)
	f.dropNew("waiting", n)
	p := f.runIdle()
	want := fmt.Sprintf("files found by listing %d, by event 0", n)
	if !strings.Contains(p.stdout.String(), want) {
		t.Errorf("summary %q, want %q", p.stdout.String(), want)
	}
	f.check(nil)
	f.figures("waiting", p)
}

// Garbage, empty, truncated and otherwise bad files are quarantined with a
// one-line reason naming the problem; the watcher goes on with the good.
func testBadFiles(t *testing.T, bin string) {
	f := newFixture(t, bin, synth.SmallPipeline)
	good := synth.Small(5)
	rows := strings.SplitAfter(string(good), "\n")
	binary := make([]byte, 600)
	for i := range binary {
		binary[i] = byte(i*7 + 3)
	}
	cases := []struct {
		name string
		data []byte
		want string
	}{
		{"garbage.csv", binary, "garbage.csv"},
		{"empty.csv", nil, "empty.csv: "},
		{"truncated.csv", []byte(strings.Join(rows[:40], "") + "1.85,"), "truncated.csv:41: "},
		{"nan.csv", []byte(strings.Join(rows[:30], "") + "1.35,NaN\n"), "nan.csv:31: "},
		{"few-rows.csv", []byte(strings.Join(rows[:8], "")), "few-rows.csv"},
		{"header-only.csv", []byte("time (min),signal (pA)\n"), "header-only.csv"},
	}
	bad := map[string]bool{}
	for _, c := range cases {
		f.drop(c.name, c.data)
		bad[c.name] = true
	}
	f.drop("good.csv", good)
	f.runIdle()
	f.check(bad)
	for _, c := range cases {
		m, _ := filepath.Glob(filepath.Join(f.out, "quarantine", "*-"+c.name+".reason.txt"))
		if len(m) != 1 {
			t.Errorf("%s: reason files %v", c.name, m)
			continue
		}
		b, _ := os.ReadFile(m[0])
		reason := string(b)
		if strings.Count(reason, "\n") != 1 || !strings.HasSuffix(reason, "\n") || !strings.HasPrefix(reason, c.want) {
			t.Errorf("%s: reason %q, want one line starting %q", c.name, reason, c.want)
		}
		if _, err := os.Stat(strings.TrimSuffix(m[0], ".reason.txt")); err != nil {
			t.Errorf("%s: the file itself is not in quarantine: %v", c.name, err)
		}
	}
}

var safeDocName = regexp.MustCompile(`^[\p{L}\p{N}+][\p{L}\p{N}._+-]*-[0-9a-f]{12}-[0-9a-f]{8}\.json$`)

// Awkward names are processed and give safe document names; temporary
// names wait until renamed; a symbolic link, inside or out, is refused
// and quarantined, its target untouched; the same content twice is
// certified once; an edited ledger line makes `ledger verify` fail.
func testNamesLinksDuplicates(t *testing.T, bin string) {
	f := newFixture(t, bin, synth.SmallPipeline)
	names := []string{"lot 7 (copy).csv", "ünïcødé λ.csv", "$(touch pwned);`id`.csv", "a;b&c|d'e\"f.csv", "-rf.csv", "new\nline.csv", "ab*?[x].csv"}
	for i, n := range names {
		f.drop(n, synth.Small(100+i))
	}
	f.drop("same as lot 7.csv", synth.Small(100))
	secret := filepath.Join(f.dir, "secret.csv")
	os.WriteFile(secret, synth.Small(200), 0o644)
	os.Symlink(secret, filepath.Join(f.inbox, "escape.csv"))
	os.Symlink("lot 7 (copy).csv", filepath.Join(f.inbox, "inside.csv"))
	f.dropped["escape.csv"], f.dropped["inside.csv"] = nil, nil
	temporary := []string{".hidden.csv", "late.csv.part", "~lock.csv", "y.csv.tmp", "z.csv~"}
	for _, n := range temporary {
		os.WriteFile(filepath.Join(f.inbox, n), synth.Small(300), 0o644)
	}
	f.runIdle()
	bad := map[string]bool{"escape.csv": true, "inside.csv": true}
	for _, n := range temporary {
		if _, err := os.Stat(filepath.Join(f.inbox, n)); err != nil {
			t.Errorf("temporary name %q was touched: %v", n, err)
		}
		if n != ".hidden.csv" {
			os.Remove(filepath.Join(f.inbox, n))
		}
	}
	// Renamed to its final name, a file is taken.
	f.drop("late.csv.part", synth.Small(300))
	delete(f.dropped, "late.csv.part")
	os.Rename(filepath.Join(f.inbox, "late.csv.part"), filepath.Join(f.inbox, "late.csv"))
	f.dropped["late.csv"] = synth.Small(300)
	f.runIdle()
	certified := f.check(bad)
	for _, it := range certified {
		if !safeDocName.MatchString(it.outputs[0].File) {
			t.Errorf("%q was written as %q, not a safe name", it.file, it.outputs[0].File)
		}
	}
	if b, err := os.ReadFile(secret); err != nil || !bytes.Equal(b, synth.Small(200)) {
		t.Errorf("the link's target was moved or changed: %v", err)
	}
	for _, n := range []string{"escape.csv", "inside.csv"} {
		m, _ := filepath.Glob(filepath.Join(f.out, "quarantine", "*-"+n+".reason.txt"))
		want := map[string]string{"escape.csv": "outside the inbox", "inside.csv": "even inside the inbox"}[n]
		if b, _ := os.ReadFile(firstOr(m)); !strings.Contains(string(b), want) {
			t.Errorf("%s: reason %q, want %q", n, b, want)
		}
	}
	filepath.WalkDir(f.dir, func(p string, d fs.DirEntry, err error) error {
		if err == nil && d.Name() == "pwned" {
			t.Errorf("a file name was run as a command: %s exists", p)
		}
		return nil
	})
	// Edit one ledger line: verify fails and names it.
	ledgerPath := filepath.Join(f.out, watch.LedgerFile)
	b, _ := os.ReadFile(ledgerPath)
	os.WriteFile(ledgerPath, bytes.Replace(b, []byte(`"verdict":"pass"`), []byte(`"verdict":"fail"`), 1), 0o644)
	if code, out := f.verify(); code != exitVerdict || !regexp.MustCompile(`BROKEN: ledger line \d+: seq \d+: the content does not match its hash`).MatchString(out) {
		t.Errorf("edited ledger: exit %d\n%s", code, out)
	}
}

func firstOr(m []string) string {
	if len(m) == 0 {
		return ""
	}
	return m[0]
}

// With events off, listings alone find every file dropped while running.
func testPolling(t *testing.T, bin string) {
	n := scale(40, 200)
	f := newFixture(t, bin, synth.SmallPipeline)
	p := f.start(nil, "--poll", "--rescan", "300ms")
	time.Sleep(300 * time.Millisecond)
	f.dropNew("poll-a", n/2)
	time.Sleep(500 * time.Millisecond)
	f.dropNew("poll-b", n-n/2)
	f.waitDone(p, n, 2*time.Minute)
	f.stop(p)
	if !strings.Contains(p.stdout.String(), "by event 0") {
		t.Errorf("summary %q: files were found by events with --poll", p.stdout.String())
	}
	f.check(nil)
}

// A second watcher on the same output folder is refused; an edit of the
// pipeline while watching is reported and recorded, and not used.
func testLockAndPipelineEdit(t *testing.T, bin string) {
	f := newFixture(t, bin, synth.SmallPipeline)
	p := f.start(nil)
	f.waitCount(p, watch.EvStart, 1, 30*time.Second)
	second := f.start(nil)
	want := fmt.Sprintf("another watcher (pid %d)", p.cmd.Process.Pid)
	if code := second.wait(t, 30*time.Second); code != exitUsage || !strings.Contains(second.stderr.String(), want) {
		t.Errorf("second watcher: exit %d, stderr %q; want %d and %q", code, second.stderr.String(), exitUsage, want)
	}
	loaded := digest([]byte(synth.SmallPipeline))
	os.WriteFile(f.pipe, []byte(strings.Replace(synth.SmallPipeline, "min   = 95.0", "min   = 99.9", 1)), 0o644)
	f.waitCount(p, watch.EvPipelineChanged, 1, 30*time.Second)
	f.dropNew("after-edit", 1)
	f.waitDone(p, 1, 30*time.Second)
	f.stop(p)
	if !strings.Contains(p.stderr.String(), "edited while watching") {
		t.Errorf("the edit was not logged:\n%s", tail(p.stderr.String(), 2000))
	}
	os.WriteFile(f.pipe, []byte(synth.SmallPipeline), 0o644) // for the reference run
	certified := f.check(nil)
	if len(certified) != 1 {
		t.Fatalf("%d certified, want 1", len(certified))
	}
	for _, it := range certified {
		doc := it.outputs[0].File
		b, _ := os.ReadFile(filepath.Join(f.out, doc))
		if !strings.HasSuffix(doc, "-"+loaded[:8]+".json") || !bytes.Contains(b, []byte(`"pipeline_sha256": "`+loaded+`"`)) || it.verdict != "pass" {
			t.Errorf("%s (verdict %s) was not made with the pipeline loaded at start", doc, it.verdict)
		}
	}
}

// The first signal lets the files in flight finish; a second stops at
// once; either way a restart finishes everything exactly once.
func testSignals(t *testing.T, bin string) {
	f := newFixture(t, bin, synth.SmallPipeline)
	f.dropNew("sig", scale(60, 200))
	p := f.start(nil)
	f.waitDone(p, 5, time.Minute)
	f.stop(p)
	if !strings.Contains(p.stdout.String(), "; 0 unfinished;") {
		t.Errorf("graceful stop left work unfinished: %s", p.stdout.String())
	}
	done := f.count(watch.EvArchived) + f.count(watch.EvQuarantined)
	p = f.start(nil)
	f.waitCount(p, watch.EvStart, 2, time.Minute)
	f.waitDone(p, done+5, time.Minute)
	p.cmd.Process.Signal(syscall.SIGINT)
	p.cmd.Process.Signal(syscall.SIGINT)
	if code := p.wait(t, time.Minute); code != exitOK && code != exitFileFail {
		t.Errorf("two signals: exit %d", code)
	}
	f.mustVerify()
	f.runIdle()
	f.check(nil)
}

// A burst of thousands of files does not make the watcher's memory grow
// with the burst: the queue is bounded and file contents are held by the
// workers only.
func testMemory(t *testing.T, bin string) {
	n := scale(400, 5000)
	f := newFixture(t, bin, synth.SmallPipeline)
	p := f.start(nil)
	f.waitCount(p, watch.EvStart, 1, 30*time.Second)
	f.dropNew("mem", n)
	f.waitDone(p, n, 10*time.Minute)
	f.stop(p)
	f.check(nil)
	f.figures(fmt.Sprintf("memory (%d-file burst)", n), p)
	if kb := maxRSS(p); kb > 256<<10 {
		t.Errorf("peak RSS %d KiB under a %d-file burst", kb, n)
	}
}

// The demo pipeline (records, workbooks, certificates) on the demo files:
// the verdicts of the scenario, every document written and verified.
func testDemoWatch(t *testing.T, bin string) {
	f := newFixture(t, bin, "")
	for _, name := range []string{"toluene-release.hcl", "okkerby-logo.png"} {
		b, err := os.ReadFile(filepath.Join("..", "..", "examples", name))
		if err != nil {
			t.Fatal(err)
		}
		os.WriteFile(filepath.Join(filepath.Dir(f.pipe), name), b, 0o644)
	}
	f.pipe = filepath.Join(filepath.Dir(f.pipe), "toluene-release.hcl")
	want := map[string]string{"T998-26-1141.csv": "pass", "T998-26-1142.csv": "fail", "blank-26-1141.csv": "pass"}
	demo := slices.Sorted(maps.Keys(want))
	for _, name := range demo {
		b, err := os.ReadFile(filepath.Join("..", "..", "examples", "data", name))
		if err != nil {
			t.Fatal(err)
		}
		f.drop(name, b)
	}
	// More injections of the same samples (a new sample ID each) for the
	// throughput figure.
	for i := range scale(0, 57) {
		base := demo[i%3]
		b := f.dropped[base]
		id := regexp.MustCompile(`(?m)^# Sample ID: .*$`).Find(b)
		name := fmt.Sprintf("rep%02d-%s", i, base)
		f.drop(name, bytes.Replace(b, id, append(id, fmt.Sprintf("-R%02d", i)...), 1))
		want[name] = want[base]
	}
	p := f.runIdle()
	certified := f.check(nil)
	for _, it := range certified {
		var formats []string
		for _, o := range it.outputs {
			formats = append(formats, o.Format)
		}
		if it.verdict != want[it.file] || !slices.Equal(formats, []string{"json", "xlsx", "pdf"}) {
			t.Errorf("%s: verdict %s, documents %v", it.file, it.verdict, formats)
		}
	}
	f.figures("demo files, all documents", p)
}

func TestWatchUsage(t *testing.T) {
	dir := t.TempDir()
	pipe := writeFile(t, dir, "p.hcl", synth.SmallPipeline)
	inbox := filepath.Join(dir, "inbox")
	os.Mkdir(inbox, 0o755)
	cases := []struct {
		args []string
		env  string
		code int
		want string
	}{
		{[]string{"watch", "--inbox", inbox, "-o", dir}, "", exitUsage, "no pipeline"},
		{[]string{"watch", "-p", pipe, "-o", dir}, "", exitUsage, "no inbox"},
		{[]string{"watch", "-p", pipe, "--inbox", inbox}, "", exitUsage, "no output folder"},
		{[]string{"watch", "-p", pipe, "--inbox", inbox, "-o", dir, "x.csv"}, "", exitUsage, "unexpected argument"},
		{[]string{"watch", "-p", pipe, "--inbox", inbox, "-o", dir, "--workers", "0"}, "", exitUsage, "--workers"},
		{[]string{"watch", "-p", pipe, "--inbox", inbox, "-o", dir, "--settle", "0s"}, "", exitUsage, "must be positive"},
		{[]string{"watch", "-p", pipe, "--inbox", inbox, "-o", dir, "--log-format", "xml"}, "", exitUsage, "text or json"},
		{[]string{"watch", "-p", pipe, "--inbox", filepath.Join(dir, "missing"), "-o", filepath.Join(dir, "o1")}, "", exitUsage, "the inbox must exist"},
		{[]string{"watch", "-p", pipe, "--inbox", inbox, "-o", inbox}, "", exitUsage, "are the same folder"},
		{[]string{"watch", "-p", pipe, "--inbox", inbox, "-o", filepath.Join(dir, "o2")}, "claimed", exitUsage, "want EVENT:N"},
		{[]string{"ledger"}, "", exitUsage, "no subcommand"},
		{[]string{"ledger", "check", dir}, "", exitUsage, "unknown subcommand"},
		{[]string{"ledger", "verify"}, "", exitUsage, "give one folder"},
		{[]string{"ledger", "verify", filepath.Join(dir, "nothing")}, "", exitUsage, "no such file"},
	}
	for _, c := range cases {
		t.Setenv("LOTGATE_WATCH_CRASH_AFTER", c.env)
		code, _, stderr := runCLI(t, c.args...)
		if code != c.code || !strings.Contains(stderr, c.want) {
			t.Errorf("%v: exit %d, stderr %q; want %d and %q", c.args, code, stderr, c.code, c.want)
		}
	}
	for _, cmd := range []string{"watch", "ledger"} {
		code, stdout, _ := runCLI(t, cmd, "--help")
		if code != exitOK || !strings.Contains(stdout, "Usage: lotgate "+cmd) {
			t.Errorf("%s --help: exit %d, %q", cmd, code, stdout)
		}
	}
}

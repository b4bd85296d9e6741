package synth

import (
	"bytes"
	"strings"
	"testing"
)

// The generated sequences depend on nothing but the code: two generations
// give the same bytes, and each file is where the sequence file says.
func TestSequencesDeterministic(t *testing.T) {
	a, b := NightSequences(), NightSequences()
	if len(a) != 2 || len(a[0].Files) != 19 {
		t.Fatalf("%d sequences, %d files in the first", len(a), len(a[0].Files))
	}
	for i := range a {
		for k, f := range a[i].Files {
			if f.Name != b[i].Files[k].Name || !bytes.Equal(f.Data, b[i].Files[k].Data) {
				t.Errorf("%s/%s differs between two generations", a[i].Name, f.Name)
			}
			if k > 0 && !strings.Contains(string(a[i].Files[0].Data), `"`+f.Name+`"`) {
				t.Errorf("%s: the sequence file does not name %s", a[i].Name, f.Name)
			}
		}
	}
	// 15 min at 10 Hz: 9,001 data rows after the metadata and header lines.
	rows := strings.Count(string(a[0].Files[1].Data), "\n") - 10
	if rows != 9001 {
		t.Errorf("%d data rows, want 9001", rows)
	}
}

// The benchmark sequence has the injections asked for, of 36,001 points.
func TestBenchmarkSequence(t *testing.T) {
	s := BenchmarkSequence(12)
	if len(s.Files) != 13 {
		t.Fatalf("%d files, want the sequence file and 12 injections", len(s.Files))
	}
	if rows := strings.Count(string(s.Files[1].Data), "\n") - 10; rows != 36001 {
		t.Errorf("%d data rows, want 36001", rows)
	}
	if !strings.Contains(string(s.Files[0].Data), `role = "check"`) {
		t.Error("no check standard")
	}
}

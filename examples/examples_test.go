package examples

import (
	"bytes"
	"io/fs"
	"testing"

	"lotgate/examples/synth"
)

// The committed demo data must be exactly what the generator makes, so the
// demo can always be traced back to its synthetic truth.
func TestDataMatchesGenerator(t *testing.T) {
	want, _ := fs.Glob(FS, "data/*.csv")
	demo := synth.Demo()
	if len(want) != len(demo) {
		t.Fatalf("%d committed files, generator makes %d", len(want), len(demo))
	}
	logo, err := FS.ReadFile("okkerby-logo.png")
	if err != nil || !bytes.Equal(logo, synth.Logo(160)) {
		t.Errorf("okkerby-logo.png differs from the generator's output; run go generate ./examples")
	}
	for _, c := range demo {
		got, err := FS.ReadFile("data/" + c.File)
		if err != nil {
			t.Fatal(err)
		}
		if !bytes.Equal(got, c.Render()) {
			t.Errorf("data/%s differs from the generator's output; run go generate ./examples", c.File)
		}
	}
}

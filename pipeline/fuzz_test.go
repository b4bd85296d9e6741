package pipeline

import (
	"testing"

	"lotgate/examples"
)

// FuzzParse: the loader never panics; it either returns a pipeline or a
// diagnostic error.
func FuzzParse(f *testing.F) {
	demo, err := examples.FS.ReadFile(examples.Pipeline)
	if err != nil {
		f.Fatal(err)
	}
	f.Add(demo)
	f.Add([]byte(minimal))
	f.Add([]byte(minimal + "smooth {\n window = 7\n order = 3\n}\n"))
	f.Add([]byte(minimal + "limit \"x\" {\n value = component.a.percent\n max = 0.10\n}\n"))
	f.Add([]byte("pipeline {\n"))
	f.Fuzz(func(t *testing.T, src []byte) {
		p, err := Parse(src, "fuzz.hcl")
		if err == nil && p == nil {
			t.Fatal("nil pipeline without error")
		}
		if err != nil && err.Error() == "" {
			t.Fatal("empty error text")
		}
	})
}

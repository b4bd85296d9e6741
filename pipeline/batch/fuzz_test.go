package batch

import (
	"testing"
)

// FuzzParse: the sequence parser never panics; it returns a sequence or a
// diagnostic error with text, and every injection it returns has a role
// and a positive replicate number when it is a sample.
func FuzzParse(f *testing.F) {
	f.Add([]byte(`# a night sequence
sequence "n1150" {
  lot         = "T998-26-1150"
  description = "Night sequence"
  unit        = "mg/kg"
}
standard "CAL-1" {
  level   = 1
  amounts = {
    benzene  = 20
    p-xylene = 100
  }
}
injection "01" {
  file = "n1150-01-blank.csv"
  role = "blank"
}
injection "02" {
  file     = "n1150-02-cal1.csv"
  role     = "calibration"
  standard = "CAL-1"
}
injection "03" {
  file      = "n1150-03-A-1.csv"
  role      = "sample"
  sample    = "T998-26-1150-A"
  replicate = 1
  dilution  = 2
}
`))
	f.Add([]byte(seqHeader + "injection \"a\" {\n  file = \"a.csv\"\n  role = \"sample\"\n  sample = \"X\"\n}\n"))
	f.Add([]byte(seqHeader + "standard \"S\" {\n  level = 2\n  amounts = { A = 1, p-xylene = 2 }\n}\n"))
	f.Add([]byte("sequence {\n"))
	f.Add([]byte("injection \"x\" { role = 3 }"))
	f.Fuzz(func(t *testing.T, src []byte) {
		seq, err := Parse(src, "fuzz.hcl")
		if err != nil {
			if err.Error() == "" {
				t.Fatal("empty error text")
			}
			return
		}
		if seq == nil {
			t.Fatal("nil sequence without error")
		}
		for _, in := range seq.Injections {
			if in.Role == "" || (in.Role == RoleSample && in.Replicate < 1) {
				t.Fatalf("injection %q: role %q, replicate %d", in.ID, in.Role, in.Replicate)
			}
		}
	})
}

package batch

import (
	"errors"
	"path/filepath"
	"strings"
	"testing"

	"lotgate/examples"
	"lotgate/examples/synth"
	"lotgate/pipeline"
)

const seqHeader = "sequence \"s\" {\n  lot = \"L1\"\n}\n"

// The demo's generated sequences parse and fit the demo's sequence
// pipeline: roles, standards, replicate numbers and data paths.
func TestDemoSequencesParse(t *testing.T) {
	p, err := pipeline.Load(filepath.Join("..", "..", "examples", examples.NightPipelineFile))
	if err != nil {
		t.Fatal(err)
	}
	for _, s := range synth.NightSequences() {
		seq, err := Parse(s.Files[0].Data, "seq/"+s.SequenceFile)
		if err != nil {
			t.Fatalf("%s: %v", s.Name, err)
		}
		if err := seq.Check(p); err != nil {
			t.Fatalf("%s: %v", s.Name, err)
		}
		if len(seq.Injections) != len(s.Files)-1 || seq.Lot != s.Lot || len(seq.Standards) != 5 {
			t.Errorf("%s: %d injections, lot %q, %d standards", s.Name, len(seq.Injections), seq.Lot, len(seq.Standards))
		}
		var roles []string
		for _, in := range seq.Injections {
			roles = append(roles, in.Role)
		}
		want := "blank calibration calibration calibration calibration calibration suitability suitability suitability suitability suitability sample sample sample sample sample sample check"
		if got := strings.Join(roles, " "); got != want {
			t.Errorf("%s roles: %s", s.Name, got)
		}
		last := seq.Injections[len(seq.Injections)-2]
		if last.Sample != s.Lot+"-B" || last.Replicate != 3 || last.Lot != s.Lot || last.Path != "seq/"+s.Files[len(s.Files)-2].Name {
			t.Errorf("%s: last sample %+v", s.Name, last)
		}
		if a, ok := seq.Standards[2].Amount("benzene"); !ok || a != 60 {
			t.Errorf("%s: CAL-3 benzene %g %v", s.Name, a, ok)
		}
	}
}

// Replicate numbers not given are the next free ones, in run order.
func TestReplicateNumbering(t *testing.T) {
	src := seqHeader + `injection "a" {
  file = "a.csv"
  role = "sample"
  sample = "X"
  replicate = 2
}
injection "b" {
  file = "b.csv"
  role = "sample"
  sample = "X"
}
injection "c" {
  file = "c.csv"
  role = "sample"
  sample = "X"
}
`
	seq, err := Parse([]byte(src), "s.hcl")
	if err != nil {
		t.Fatal(err)
	}
	for i, want := range []int{2, 1, 3} {
		if got := seq.Injections[i].Replicate; got != want {
			t.Errorf("injection %d: replicate %d, want %d", i+1, got, want)
		}
	}
}

// Every mistake in a sequence file is a diagnostic with its line.
func TestSequenceDiagnostics(t *testing.T) {
	inj := func(body string) string { return "injection \"i\" {\n  file = \"i.csv\"\n" + body + "}\n" }
	cases := []struct {
		name, src string
		line      int
		want      string
	}{
		{"no header", inj("  role = \"blank\"\n"), 1, "Missing sequence block"},
		{"no injections", seqHeader, 1, "No injections"},
		{"role typo", seqHeader + inj("  role = \"sampel\"\n"), 6, `did you mean "sample"?`},
		{"unknown standard", seqHeader + inj("  role = \"check\"\n  standard = \"CAL-9\"\n"), 7, `no standard "CAL-9"`},
		{"check without standard", seqHeader + inj("  role = \"check\"\n"), 4, "names its standard"},
		{"sample without id", seqHeader + inj("  role = \"sample\"\n"), 4, "names its sample"},
		{"replicate on a blank", seqHeader + inj("  role = \"blank\"\n  replicate = 1\n"), 7, "sample injections only"},
		{"fractional replicate", seqHeader + inj("  role = \"sample\"\n  sample = \"X\"\n  replicate = 1.5\n"), 8, "whole number"},
		{"zero dilution", seqHeader + inj("  role = \"sample\"\n  sample = \"X\"\n  dilution = 0\n"), 8, "greater than 0"},
		{"negative amount", seqHeader + "standard \"S\" {\n  amounts = { A = -1 }\n}\n" + inj("  role = \"blank\"\n"), 5, "not below 0"},
		{"empty amounts", seqHeader + "standard \"S\" {\n  amounts = {}\n}\n" + inj("  role = \"blank\"\n"), 5, "at least one component"},
		{"duplicate standard", seqHeader + "standard \"S\" {\n  amounts = { A = 1 }\n}\nstandard \"S\" {\n  amounts = { A = 2 }\n}\n" + inj("  role = \"blank\"\n"), 7, "already declared"},
		{"duplicate id", seqHeader + inj("  role = \"blank\"\n") + inj("  role = \"blank\"\n"), 8, "already declared"},
		{"duplicate replicate", seqHeader +
			"injection \"a\" {\n  file = \"a.csv\"\n  role = \"sample\"\n  sample = \"X\"\n  replicate = 1\n}\n" +
			"injection \"b\" {\n  file = \"b.csv\"\n  role = \"sample\"\n  sample = \"X\"\n  replicate = 1\n}\n", 10, "replicate 1 of sample"},
		{"unknown attribute", seqHeader + inj("  role = \"blank\"\n  volume = 1\n"), 7, "Unsupported argument"},
		{"syntax", seqHeader + "injection \"i\" {\n  file = \n}\n", 5, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Parse([]byte(c.src), "night.hcl")
			var se *pipeline.Error
			if !errors.As(err, &se) {
				t.Fatalf("want a diagnostic error, got %v", err)
			}
			found := false
			for _, d := range se.Diags {
				if d.Subject != nil && d.Subject.Start.Line == c.line && strings.Contains(d.Summary+" "+d.Detail, c.want) {
					found = true
				}
			}
			if !found {
				t.Errorf("no diagnostic at line %d containing %q:\n%s", c.line, c.want, se.Error())
			}
			if !strings.Contains(se.Pretty(), "night.hcl") {
				t.Errorf("pretty form lacks the file name:\n%s", se.Pretty())
			}
		})
	}
}

// Check compares the sequence with the pipeline.
func TestSequenceCheck(t *testing.T) {
	p := mustPipeline(t, testPipeline)
	blank := "injection \"b\" {\n  file = \"b.csv\"\n  role = \"blank\"\n}\n"
	cal := "injection \"c\" {\n  file = \"c.csv\"\n  role = \"calibration\"\n  standard = \"S\"\n}\n"
	cases := []struct {
		name, src, want string
	}{
		{"unknown component", seqHeader + "standard \"S\" {\n  amounts = { AA = 1 }\n}\n" + cal, `did you mean "A"?`},
		{"unit", "sequence \"s\" {\n  unit = \"mg/kg\"\n}\n" + "standard \"S\" {\n  amounts = { A = 1 }\n}\n" + cal, `calibrates in "mg/L"`},
		{"no standards", seqHeader + blank, `no calibration injection's standard gives an amount of it`},
	}
	for _, c := range cases {
		seq, err := Parse([]byte(c.src), "s.hcl")
		if err != nil {
			t.Fatalf("%s: %v", c.name, err)
		}
		if err := seq.Check(p); err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("%s: %v, want %q", c.name, err, c.want)
		}
	}
	// A pipeline without a calibration block cannot use calibration injections.
	plain := mustPipeline(t, strings.Split(testPipeline, "calibration {")[0])
	seq, err := Parse([]byte(seqHeader+"standard \"S\" {\n  amounts = { A = 1 }\n}\n"+cal), "s.hcl")
	if err != nil {
		t.Fatal(err)
	}
	if err := seq.Check(plain); err == nil || !strings.Contains(err.Error(), "no calibration block") {
		t.Errorf("no calibration block: %v", err)
	}
}

func TestLotStem(t *testing.T) {
	for in, want := range map[string]string{
		"T998-26-1150": "lot-T998-26-1150",
		"A/B 7":        "lot-A_B_7",
		"x.y_z":        "lot-x.y_z",
		"Ölfass":       "lot-_lfass",
	} {
		if got := LotStem(in); got != want {
			t.Errorf("LotStem(%q) = %q, want %q", in, got, want)
		}
	}
}

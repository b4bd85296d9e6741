package pipeline

import (
	"errors"
	"os"
	"path/filepath"
	"strings"
	"testing"
	"testing/fstest"

	"lotgate/examples"
	"lotgate/steps"
)

const minimal = `pipeline "t" {
  revision = 1
}
`

func TestDemoPipelineLoads(t *testing.T) {
	p, err := Load(filepath.Join("..", "examples", examples.Pipeline))
	if err != nil {
		t.Fatal(err)
	}
	if len(p.Logo) == 0 || p.Report.LogoSHA256 == "" || len(p.Report.Cautions) != len(DefaultCautions)+1 {
		t.Errorf("report: logo %d bytes, %d cautions", len(p.Logo), len(p.Report.Cautions))
	}
	var names []string
	for _, s := range p.Steps {
		names = append(names, s.Name())
	}
	if got := strings.Join(names, ","); got != "smooth,baseline,detect,integrate,identify,quantify" {
		t.Errorf("steps in order written: got %s", got)
	}
	if p.Name != "toluene-release" || p.Revision != 3 || len(p.Limits) != 7 {
		t.Errorf("header/limits: %q rev %d, %d limits", p.Name, p.Revision, len(p.Limits))
	}
	// "99.80" keeps its two written decimals: a limit is significant to the
	// last digit shown (USP General Notices, check-values.md §6 [S]).
	if l := p.Limits[0]; l.Min != "99.80" || l.Digits != 2 {
		t.Errorf("purity limit: min %q digits %d, want 99.80 and 2", l.Min, l.Digits)
	}
}

// Every mistake is a diagnostic naming file, line and what is wrong.
func TestDiagnostics(t *testing.T) {
	cases := []struct {
		name, src string
		line      int
		want      string
	}{
		{"block typo", minimal + "smoth {\n  window = 9\n}\n", 4, `Did you mean "smooth"?`},
		{"attribute typo", minimal + "smooth {\n  windw = 9\n}\n", 5, `Did you mean "window"?`},
		{"even window", minimal + "smooth {\n  window = 10\n}\n", 5, "odd number of points from 5 to 101, not 10"},
		{"order too high", minimal + "smooth {\n  window = 5\n  order = 5\n}\n", 6, "order 5 must be less than the window of 5 points"},
		{"fractional window", minimal + "smooth {\n  window = 9.5\n}\n", 5, "window must be a whole number"},
		{"lambda", minimal + "baseline {\n  lambda = 0\n}\n", 5, "lambda must be greater than 0"},
		{"asymmetry", minimal + "baseline {\n  asymmetry = 0.7\n}\n", 5, "asymmetry must lie between 0 and 0.5"},
		{"method typo", minimal + "smooth {\n  method = \"savitzky-golai\"\n}\n", 5, `did you mean "savitzky-golay"?`},
		{"string for number", minimal + "detect {\n  min_snr = \"high\"\n}\n", 5, "min_snr must be number"},
		{"missing header", "smooth {\n  window = 9\n}\n", 1, "Missing pipeline block"},
		{"step order", minimal + "integrate {\n}\n", 4, "the integrate step needs a detect step before it"},
		{"quantify before identify", minimal + "detect {\n}\nintegrate {\n}\nquantify {\n}\nidentify {\n  component \"a\" {\n    rt = 1\n    window = 0.1\n  }\n}\n", 8, "quantify must come after identify"},
		{"limit without bounds", minimal + "limit \"x\" {\n  value = peak_count\n}\n", 4, "a limit needs min, max or both"},
		{"limit min above max", minimal + "limit \"x\" {\n  value = peak_count\n  min = 2\n  max = 1\n}\n", 4, "min"},
		{"window overlap", minimal + "detect {\n}\nintegrate {\n}\nidentify {\n  component \"a\" {\n    rt = 5\n    window = 0.1\n  }\n  component \"b\" {\n    rt = 5.15\n    window = 0.1\n  }\n}\n", 14, "overlaps"},
		{"no window", minimal + "detect {\n}\nintegrate {\n}\nidentify {\n  component \"a\" {\n    rt = 5\n  }\n}\n", 9, "needs a retention window"},
		{"two mains", minimal + "detect {\n}\nintegrate {\n}\nidentify {\n  component \"a\" {\n    rt = 5\n    window = 0.1\n    main = true\n  }\n  component \"b\" {\n    rt = 7\n    window = 0.1\n    main = true\n  }\n}\n", 17, "only one component can be the main"},
		{"ignore backwards", minimal + "detect {\n  ignore {\n    from = 2\n    to = 1\n  }\n}\n", 7, "must be later than from"},
		{"syntax", minimal + "smooth {\n  window = \n}\n", 5, ""},
		{"duplicate input", minimal + "input {\n}\ninput {\n}\n", 6, "Duplicate input block"},
		{"unknown time unit", minimal + "input {\n  time_unit = \"hours\"\n}\n", 5, `"hours" is not known`},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			_, err := Parse([]byte(c.src), "method.hcl")
			var pe *Error
			if !errors.As(err, &pe) {
				t.Fatalf("want a diagnostic error, got %v", err)
			}
			msg := err.Error()
			if !strings.Contains(msg, "method.hcl:") {
				t.Errorf("error does not name the file: %s", msg)
			}
			if !strings.Contains(msg, c.want) {
				t.Errorf("error %q does not say %q", msg, c.want)
			}
			if got := pe.Diags[0].Subject.Start.Line; got != c.line {
				t.Errorf("line %d, want %d (%s)", got, c.line, msg)
			}
			if pretty := pe.Pretty(); !strings.Contains(pretty, "method.hcl line") && !strings.Contains(pretty, "on method.hcl") {
				t.Errorf("pretty form has no source reference: %s", pretty)
			}
		})
	}
}

func TestLoadMissingFile(t *testing.T) {
	_, err := Load(filepath.Join(t.TempDir(), "nope.hcl"))
	if err == nil || !errors.Is(err, os.ErrNotExist) || !strings.Contains(err.Error(), "nope.hcl") {
		t.Fatalf("want a not-exist error naming the file, got %v", err)
	}
}

func TestStepsDefaultsRecorded(t *testing.T) {
	p, err := Parse([]byte(minimal+"smooth {\n}\n"), "m.hcl")
	if err != nil {
		t.Fatal(err)
	}
	s := p.Steps[0].(*steps.Smooth)
	if s.Method != steps.SavitzkyGolay || s.Window != 9 || s.Order != 2 {
		t.Errorf("defaults: %+v", s)
	}
	m := p.method()
	if len(m.Steps) != 1 || len(m.Steps[0].Settings) != 3 {
		t.Errorf("settings recorded: %+v", m.Steps)
	}
}

func TestReportBlock(t *testing.T) {
	cases := []struct {
		name, body, want string
	}{
		{"unknown format", `formats = ["json", "docx"]`, `format "docx" is not known`},
		{"json required", `formats = ["pdf"]`, `formats must include "json"`},
		{"paper", `paper = "A3"`, `paper "A3" is not known`},
		{"missing logo", `logo = "nope.png"`, "cannot read the logo"},
		{"safety note cannot remove", `safety_note = ""`, ""},
	}
	for _, c := range cases {
		t.Run(c.name, func(t *testing.T) {
			p, err := Parse([]byte(minimal+"report {\n  "+c.body+"\n}\n"), filepath.Join(t.TempDir(), "m.hcl"))
			if c.want == "" {
				if err != nil {
					t.Fatal(err)
				}
				if len(p.Report.Cautions) != len(DefaultCautions) {
					t.Errorf("the default cautions must always be there: %v", p.Report.Cautions)
				}
				return
			}
			if err == nil || !strings.Contains(err.Error(), c.want) {
				t.Errorf("got %v, want %q", err, c.want)
			}
		})
	}
}

// A pipeline loaded from a file system (a frozen bundle) reads its files
// from there and nowhere else.
func TestLoadFS(t *testing.T) {
	fsys := fstest.MapFS{
		"m/p.hcl":    {Data: []byte(minimal + "report {\n  logo = \"logo.png\"\n}\n")},
		"m/logo.png": {Data: []byte("png")},
		"m/out.hcl":  {Data: []byte(minimal + "report {\n  logo = \"../../secret.png\"\n}\n")},
		"m/abs.hcl":  {Data: []byte(minimal + "report {\n  logo = \"/etc/hostname\"\n}\n")},
	}
	p, err := LoadFS(fsys, "m/p.hcl")
	if err != nil {
		t.Fatal(err)
	}
	if string(p.Logo) != "png" || len(p.Refs) != 1 || p.Refs[0] != "logo.png" {
		t.Errorf("logo %q refs %v", p.Logo, p.Refs)
	}
	for _, name := range []string{"m/out.hcl", "m/abs.hcl"} {
		if _, err := LoadFS(fsys, name); err == nil || !strings.Contains(err.Error(), "outside the bundle") {
			t.Errorf("%s: want a refusal, got %v", name, err)
		}
	}
}

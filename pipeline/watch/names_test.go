package watch

import (
	"regexp"
	"strings"
	"testing"
	"unicode/utf8"
)

func TestIgnoredName(t *testing.T) {
	// The temporary names of common copy, download and editing tools
	// (common practice).
	cases := []struct {
		name    string
		ignored bool
	}{
		{"T998-26-1141.csv", false},
		{"lot 7 (copy).csv", false},
		{"ünïcødé.csv", false},
		{"run.CSV", false},
		{"noext", false},
		{".hidden.csv", true},
		{".~lock.run.csv#", true},
		{"~$run.csv", true},
		{"run.csv~", true},
		{"run.csv.tmp", true},
		{"run.csv.TMP", true},
		{"run.csv.part", true},
		{"run.csv.partial", true},
		{"run.csv.crdownload", true},
		{"run.csv.filepart", true},
		{".run.csv.swp", true},
		{"tmp.csv", false},
		{"part.csv", false},
	}
	for _, c := range cases {
		if got := ignoredName(c.name); got != c.ignored {
			t.Errorf("ignoredName(%q) = %v, want %v", c.name, got, c.ignored)
		}
	}
}

func TestOutputStem(t *testing.T) {
	sha := "0123456789abcdef0123456789abcdef0123456789abcdef0123456789abcdef"
	pipe := "fedcba9876543210fedcba9876543210fedcba9876543210fedcba9876543210"
	tail := "-0123456789ab-fedcba98"
	cases := []struct{ file, want string }{
		{"T998-26-1141.csv", "T998-26-1141"},
		{"lot 7 (copy).csv", "lot_7_copy"},
		{"ünïcødé λ.csv", "ünïcødé_λ"},
		{"../../etc/passwd", "etc_passwd"},
		{"..csv", "data"},
		{"a..b.csv", "a.b"},
		{"$(rm -rf ~);`x`.csv", "rm_-rf_x"},
		{".hidden", "data"},
		{"-rf.csv", "rf"},
		{"a\nb\\c/d.csv", "a_b_c_d"},
		{"", "data"},
	}
	for _, c := range cases {
		if got := outputStem(c.file, sha, pipe); got != c.want+tail {
			t.Errorf("outputStem(%q) = %q, want %q", c.file, got, c.want+tail)
		}
	}
	safe := regexp.MustCompile(`^[\p{L}\p{N}+_][\p{L}\p{N}._+-]*-[0-9a-f]{12}-[0-9a-f]{8}$`)
	long := strings.Repeat("é", 200) + ".csv"
	for _, f := range []string{long, "a/../b", "...", "x\x00y"} {
		got := outputStem(f, sha, pipe)
		if !safe.MatchString(got) || strings.Contains(got, "..") || len(got) > 80+len(tail) || !utf8.ValidString(got) {
			t.Errorf("outputStem(%q) = %q is not a safe name", f, got)
		}
	}
}

func TestItemName(t *testing.T) {
	if got := itemName(17, "run.csv"); got != "17-run.csv" {
		t.Errorf("itemName = %q", got)
	}
	long := strings.Repeat("λ", 300)
	got := itemName(123456, long)
	// Most file systems allow names of 255 bytes (common practice); the
	// reason file adds ".reason.txt".
	if len(got+".reason.txt") > 255 || !utf8.ValidString(got) || !strings.HasPrefix(got, "123456-λ") {
		t.Errorf("itemName of a long name: %d bytes, valid %v", len(got), utf8.ValidString(got))
	}
}

func TestLinkReason(t *testing.T) {
	cases := []struct{ target, want string }{
		{"/etc/passwd", "outside the inbox"},
		{"../secret.csv", "outside the inbox"},
		{"sub/../../x.csv", "outside the inbox"},
		{"other.csv", "even inside the inbox"},
		{"/drop/inbox/other.csv", "even inside the inbox"},
	}
	for _, c := range cases {
		got := linkReason("/drop/inbox", "link.csv", c.target)
		if !strings.Contains(got, c.want) || !strings.HasPrefix(got, "link.csv: symbolic link") {
			t.Errorf("linkReason(%q) = %q, want %q", c.target, got, c.want)
		}
	}
}

func TestOneLine(t *testing.T) {
	cases := []struct{ in, want string }{
		{"a.csv:3: bad", "a.csv:3: bad"},
		{"first\nsecond\r\nthird", "first; second; third"},
		{"tab\there", "tab?here"},
	}
	for _, c := range cases {
		if got := oneLine(c.in); got != c.want {
			t.Errorf("oneLine(%q) = %q, want %q", c.in, got, c.want)
		}
	}
}

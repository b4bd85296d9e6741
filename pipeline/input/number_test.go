package input

import (
	"math"
	"strconv"
	"strings"
	"testing"
)

// TestParseNumber checks the reader's number parser against
// strconv.ParseFloat, which gives the correctly rounded IEEE 754 double for a
// decimal string: the results must be bit-identical. fast says which inputs
// the fast path must take, so that it is not silently bypassed.
func TestParseNumber(t *testing.T) {
	tests := []struct {
		in   string
		fast bool
	}{
		{"0", true}, {"-0", true}, {"+0.000", true}, {"12.5", true}, {"-3", true},
		{".5", true}, {"5.", true}, {"007.250", true}, {"0.1", true}, {"0.3", true},
		{"1.25e-3", true}, {"1E+5", true}, {"123456.789012", true},
		{"9007199254740992", true}, // 2^53, the largest exact integer bound (IEEE 754 binary64)
		{"9007199254740993", false},
		{"1234567890123456789012", false},
		{"1e22", true}, {"1e23", false}, {"1e-22", true}, {"1e-23", false},
		{"4.9e-324", false}, {"1.7976931348623157e308", false},
		{"0.000000000000000000000000001", false},
		{"0e999999", true},
		{"0x1p-2", false}, {"1_000", false}, {"Inf", false}, {"-nan", false},
		{"", false}, {"-", false}, {".", false}, {"1e", false}, {"1e+", false},
		{"0.1234567890123456789012345678901234567890123456789012345678901234567890", false},
		{"1.2.3", false}, {"--1", false}, {"1e400", false}, {"1e-400", false},
	}
	for _, tc := range tests {
		want, wantErr := strconv.ParseFloat(tc.in, 64)
		got, err := parseNumber([]byte(tc.in), false)
		if (err == nil) != (wantErr == nil) || math.Float64bits(got) != math.Float64bits(want) {
			t.Errorf("parseNumber(%q) = %v, %v; strconv gives %v, %v", tc.in, got, err, want, wantErr)
		}
		if _, ok := parseFast([]byte(tc.in), false); ok != tc.fast {
			t.Errorf("parseFast(%q) took the fast path: %v, want %v", tc.in, ok, tc.fast)
		}
		// The same number with a decimal comma, where one is allowed.
		comma := strings.Replace(tc.in, ".", ",", 1)
		got, err = parseNumber([]byte(comma), true)
		if (err == nil) != (wantErr == nil) || math.Float64bits(got) != math.Float64bits(want) {
			t.Errorf("parseNumber(%q, decimal comma) = %v, %v; strconv gives %v for %q", comma, got, err, want, tc.in)
		}
	}
}

// FuzzParseNumber checks that the reader's number parser gives the same bits
// and the same acceptance as strconv.ParseFloat.
func FuzzParseNumber(f *testing.F) {
	for _, s := range []string{"0", "-12.5", "1.25e-3", "9007199254740993", "1e23", ".5", "0x1p3", "1,5"} {
		f.Add(s)
	}
	f.Fuzz(func(t *testing.T, s string) {
		want, wantErr := strconv.ParseFloat(s, 64)
		got, err := parseNumber([]byte(s), false)
		if (err == nil) != (wantErr == nil) {
			t.Fatalf("parseNumber(%q) error %v, strconv %v", s, err, wantErr)
		}
		if wantErr != nil {
			if ne := wantErr.(*strconv.NumError); ne.Err != err {
				t.Fatalf("parseNumber(%q) error %v, strconv %v", s, err, ne.Err)
			}
		}
		if math.Float64bits(got) != math.Float64bits(want) && !(math.IsNaN(got) && math.IsNaN(want)) {
			t.Fatalf("parseNumber(%q) = %v (%#x), strconv gives %v (%#x)", s, got, math.Float64bits(got), want, math.Float64bits(want))
		}
		if strings.ContainsRune(s, '.') {
			return
		}
		// With a decimal comma allowed, the comma spelling parses as the point spelling.
		dot := strings.ReplaceAll(s, ",", ".")
		want, wantErr = strconv.ParseFloat(dot, 64)
		got, err = parseNumber([]byte(s), true)
		if (err == nil) != (wantErr == nil) || (err == nil && math.Float64bits(got) != math.Float64bits(want) && !math.IsNaN(want)) {
			t.Fatalf("parseNumber(%q, decimal comma) = %v, %v; strconv(%q) gives %v, %v", s, got, err, dot, want, wantErr)
		}
	})
}

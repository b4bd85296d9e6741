package rules

import (
	"math"
	"math/big"
	"strconv"
	"strings"
	"testing"
)

// uspTable is the USP rounding table of check-values.md §6: the USP
// (half-up) columns are [S] (USP General Notices 7.20), the E29 column [D].
// Limits are written as the specification writes them.
var uspTable = []struct {
	min, max   string // the limit
	digits     int    // places of the limit's last digit
	unrounded  string
	usp        string // USP rounded
	uspOK      bool   // USP conforms
	e29        string // E29 rounded
	e29OK      bool   // E29 conforms (the E29 value against the same limit)
	differ     bool   // a bold row: the two rules differ
	floatInput float64
}{
	{min: "98.0", digits: 1, unrounded: "97.96", usp: "98.0", uspOK: true, e29: "98.0", e29OK: true, floatInput: 97.96},
	{min: "98.0", digits: 1, unrounded: "97.92", usp: "97.9", uspOK: false, e29: "97.9", e29OK: false, floatInput: 97.92},
	{min: "98.0", digits: 1, unrounded: "97.95", usp: "98.0", uspOK: true, e29: "98.0", e29OK: true, floatInput: 97.95},
	{max: "101.5", digits: 1, unrounded: "101.55", usp: "101.6", uspOK: false, e29: "101.6", e29OK: false, floatInput: 101.55},
	{max: "101.5", digits: 1, unrounded: "101.46", usp: "101.5", uspOK: true, e29: "101.5", e29OK: true, floatInput: 101.46},
	{max: "101.5", digits: 1, unrounded: "101.45", usp: "101.5", uspOK: true, e29: "101.4", e29OK: true, differ: true, floatInput: 101.45},
	{max: "0.02", digits: 2, unrounded: "0.025", usp: "0.03", uspOK: false, e29: "0.02", e29OK: true, differ: true, floatInput: 0.025},
	{max: "0.02", digits: 2, unrounded: "0.015", usp: "0.02", uspOK: true, e29: "0.02", e29OK: true, floatInput: 0.015},
	{max: "0.02", digits: 2, unrounded: "0.027", usp: "0.03", uspOK: false, e29: "0.03", e29OK: false, floatInput: 0.027},
	{max: "0.0003", digits: 4, unrounded: "0.00035", usp: "0.0004", uspOK: false, e29: "0.0004", e29OK: false, floatInput: 0.00035},
	{max: "0.0003", digits: 4, unrounded: "0.00025", usp: "0.0003", uspOK: true, e29: "0.0002", e29OK: true, differ: true, floatInput: 0.00025},
	{max: "0.0003", digits: 4, unrounded: "0.00028", usp: "0.0003", uspOK: true, e29: "0.0003", e29OK: true, floatInput: 0.00028},
}

func TestRoundUSPTable(t *testing.T) {
	for _, c := range uspTable {
		// check-values.md §6, USP table: USP column [S], E29 column [D].
		if got, err := Round(c.unrounded, c.digits, HalfUp); err != nil || got != c.usp {
			t.Errorf("Round(%s, %d, half-up) = %q, %v; USP table gives %s", c.unrounded, c.digits, got, err, c.usp)
		}
		if got, err := Round(c.unrounded, c.digits, E29); err != nil || got != c.e29 {
			t.Errorf("Round(%s, %d, E29) = %q, %v; E29 column gives %s", c.unrounded, c.digits, got, err, c.e29)
		}
		if (c.usp != c.e29) != c.differ {
			t.Errorf("%s: the table marks differ=%v for USP %s and E29 %s", c.unrounded, c.differ, c.usp, c.e29)
		}
	}
}

func TestRoundE29Examples(t *testing.T) {
	// check-values.md §6, "More E29 examples" [D].
	for _, c := range []struct {
		in     string
		digits int
		want   string
	}{
		{"2.35", 1, "2.4"},
		{"2.45", 1, "2.4"},
		{"2.4501", 1, "2.5"}, // one step: rounding 2.4501 → 2.450 → 2.4 in two steps is wrong
		{"2.349", 1, "2.3"},
		{"0.125", 2, "0.12"},
		{"0.135", 2, "0.14"},
	} {
		if got, err := Round(c.in, c.digits, E29); err != nil || got != c.want {
			t.Errorf("Round(%s, %d, E29) = %q, %v; want %s", c.in, c.digits, got, err, c.want)
		}
	}
}

func TestRoundForms(t *testing.T) {
	// The rule of check-values.md §6 [M, corroborated S] applied by hand [D];
	// negative values round symmetrically (common practice).
	for _, c := range []struct {
		in       string
		digits   int
		mode     Rounding
		want     string
		whyCheck string
	}{
		{"-0.125", 2, E29, "-0.12", "negative tie to even"},
		{"-0.125", 2, HalfUp, "-0.13", "negative tie away from zero"},
		{"-0.135", 2, E29, "-0.14", "negative tie to even, upwards in magnitude"},
		{"2.5e-4", 4, E29, "0.0002", "exponent form, tie to even"},
		{"2.5E-4", 4, HalfUp, "0.0003", "upper-case exponent"},
		{"1E3", 1, E29, "1000.0", "padding with zeros"},
		{"0.1", 2, E29, "0.10", "exactly max(digits, 0) decimals"},
		{"98", 1, E29, "98.0", "integer input"},
		{"-0.00", 2, E29, "0.00", "no negative zero"},
		{"-0.001", 2, HalfUp, "0.00", "rounds to zero: no negative zero"},
		{"0.004999", 2, HalfUp, "0.00", "half-up looks at the whole rejected part"},
		{"9.995", 2, E29, "10.00", "carry into a new digit"},
		{"-9.95", 1, HalfUp, "-10.0", "negative carry"},
		{"1234", -1, E29, "1230", "negative digits: tens"},
		{"1250", -2, E29, "1200", "hundreds, tie to even"},
		{"1350", -2, E29, "1400", "hundreds, tie to even upwards"},
		{"1250", -2, HalfUp, "1300", "hundreds, half-up"},
		{"5", -1, E29, "0", "tie to even zero"},
		{"5", -1, HalfUp, "10", "tie away from zero"},
		{"0.5", 0, E29, "0", "digits zero: no decimal point"},
		{"1.5", 0, E29, "2", "digits zero, odd kept digit"},
		{"0.0005", 2, E29, "0.00", "first rejected digit is a zero"},
		{"+.5", 0, HalfUp, "1", "leading sign and point"},
		{"5.", 0, E29, "5", "trailing point"},
		{"000123.4500", 1, E29, "123.4", "leading and trailing zeros are not digits of the value"},
		{"101.45", 1, Absolute, "101.4", "absolute method displays half to even"},
		{"1e-400", 0, E29, "0", "smallest accepted magnitude"},
	} {
		if got, err := Round(c.in, c.digits, c.mode); err != nil || got != c.want {
			t.Errorf("Round(%s, %d, %s) = %q, %v; want %s (%s)", c.in, c.digits, c.mode, got, err, c.want, c.whyCheck)
		}
	}
}

func TestRoundErrors(t *testing.T) {
	for _, c := range []struct {
		in     string
		digits int
		mode   Rounding
		want   string // part of the message
	}{
		{"", 1, E29, "invalid decimal"},
		{".", 1, E29, "invalid decimal"},
		{"-", 1, E29, "invalid decimal"},
		{"1e", 1, E29, "invalid decimal"},
		{"1.2.3", 1, E29, "invalid decimal"},
		{" 1", 1, E29, "invalid decimal"},
		{"NaN", 1, E29, "invalid decimal"},
		{"Inf", 1, E29, "invalid decimal"},
		{"0x10", 1, E29, "invalid decimal"},
		{"1_000", 1, E29, "invalid decimal"},
		{"1e99999999999", 1, E29, "exponent is too large"},
		{"1e400", 1, E29, "out of range"},
		{"1e-401", 1, E29, "out of range"},
		{"1", 401, E29, "decimal places"},
		{"1", 1, "bankers", `unknown rounding "bankers"`},
		{"1", 1, "", "unknown rounding"},
	} {
		got, err := Round(c.in, c.digits, c.mode)
		if err == nil || !strings.Contains(err.Error(), c.want) {
			t.Errorf("Round(%q, %d, %q) = %q, %v; want an error containing %q", c.in, c.digits, c.mode, got, err, c.want)
		}
	}
}

func TestParseRounding(t *testing.T) {
	for _, r := range []Rounding{E29, HalfUp, Absolute} {
		if got, err := ParseRounding(string(r)); err != nil || got != r {
			t.Errorf("ParseRounding(%q) = %q, %v", r, got, err)
		}
	}
	if _, err := ParseRounding("ASTM-E29"); err == nil {
		t.Error("ParseRounding accepted a name in the wrong case")
	}
}

func TestDecimal(t *testing.T) {
	a, b := 0.1, 0.2 // variables: constant arithmetic would be exact
	for _, c := range []struct {
		x      float64
		want   string
		source string
	}{
		{101.45, "101.45", "check-values.md §6: 101.45 has no exact float64 form"},
		{a + b, "0.30000000000000004", "IEEE 754 double sum, from memory"},
		{1e-7, "0.0000001", "no exponent"},
		{2.5e-5, "0.000025", "no exponent"},
		{1e21, "1000000000000000000000", "no exponent for large values"},
		{math.Copysign(0, -1), "0", "negative zero"},
		{-97.95, "-97.95", "negative"},
		{math.SmallestNonzeroFloat64, "0." + strings.Repeat("0", 323) + "5", "smallest subnormal, 4.9406564584124654e-324, shortest form 5e-324"},
	} {
		got, err := Decimal(c.x)
		if err != nil || got != c.want {
			t.Errorf("Decimal(%g) = %q, %v; want %s (%s)", c.x, got, err, c.want, c.source)
			continue
		}
		// The decimal reads back as the same float (round trip).
		if back, err := strconv.ParseFloat(got, 64); err != nil || back != c.x {
			t.Errorf("Decimal(%g) = %s reads back as %g, %v", c.x, got, back, err)
		}
	}
	for _, x := range []float64{math.NaN(), math.Inf(1), math.Inf(-1)} {
		if got, err := Decimal(x); err == nil {
			t.Errorf("Decimal(%g) = %q, want an error", x, got)
		}
	}
}

// TestRoundShortestNotBinary shows why a value is rounded from its shortest
// decimal: the exact binary value of 101.45 lies above the tie.
func TestRoundShortestNotBinary(t *testing.T) {
	exact := new(big.Float).SetFloat64(101.45).Text('f', 60) // the exact binary expansion, computed
	if !strings.HasPrefix(exact, "101.45000000000000284") {
		t.Fatalf("exact expansion of 101.45 = %s", exact)
	}
	// check-values.md §6, USP table, bold row: 101.45 rounds to 101.4 under E29 [D].
	if got, _ := Round(exact, 1, E29); got != "101.5" {
		t.Errorf("binary value rounds to %s, want 101.5 (5 followed by non-zero digits)", got)
	}
	s, _ := Decimal(101.45)
	if got, _ := Round(s, 1, E29); got != "101.4" {
		t.Errorf("shortest decimal rounds to %s, want 101.4", got)
	}
}

func TestCompare(t *testing.T) {
	// Exact decimal order [D].
	for _, c := range []struct {
		a, b string
		want int
	}{
		{"1e3", "1000.0", 0},
		{"-0.5", "-0.50", 0},
		{"0", "-0", 0},
		{"0.1", "0.09", 1},
		{"0.1", "0.10000000000000001", -1},
		{"-0.1", "-0.09", -1},
		{"-1", "0", -1},
		{"99.5", "99.49", 1},
		{"100", "99.99", 1},
		{"2.5e-4", "0.00025", 0},
	} {
		a, err1 := parseDecimal(c.a)
		b, err2 := parseDecimal(c.b)
		if err1 != nil || err2 != nil {
			t.Fatal(err1, err2)
		}
		if got := a.cmp(b); got != c.want {
			t.Errorf("cmp(%s, %s) = %d, want %d", c.a, c.b, got, c.want)
		}
		if got := b.cmp(a); got != -c.want {
			t.Errorf("cmp(%s, %s) = %d, want %d", c.b, c.a, got, -c.want)
		}
	}
}

// FuzzRound checks Round against exact rational arithmetic: the result lies
// within half a unit of the input, a tie goes to the even digit (E29 and,
// for display, Absolute) or away from zero (HalfUp), the result has exactly
// max(digits, 0) decimals, and rounding it again changes nothing.
func FuzzRound(f *testing.F) {
	for _, c := range uspTable {
		f.Add(c.unrounded, int8(c.digits), uint8(0))
		f.Add(c.unrounded, int8(c.digits), uint8(1))
	}
	for _, s := range []string{"2.4501", "-0.125", "9.995", "1250", "+.5", "5.", "1E3", "2.5e-4",
		"1e-400", "1e400", "-0.00", "", "1e", "0x10", "1e99999999999"} {
		f.Add(s, int8(2), uint8(0))
		f.Add(s, int8(-2), uint8(2))
	}
	modes := []Rounding{E29, HalfUp, Absolute}
	f.Fuzz(func(t *testing.T, s string, d int8, m uint8) {
		digits, mode := int(d), modes[int(m)%len(modes)]
		got, err := Round(s, digits, mode)
		if err != nil {
			return
		}
		in, ok := new(big.Rat).SetString(s)
		if !ok {
			t.Fatalf("Round accepted %q, which big.Rat rejects", s)
		}
		out, ok := new(big.Rat).SetString(got)
		if !ok {
			t.Fatalf("Round(%q, %d) = %q is not a decimal", s, digits, got)
		}
		wantDecimals := max(digits, 0)
		if i := strings.IndexByte(got, '.'); (i < 0 && wantDecimals != 0) || (i >= 0 && len(got)-i-1 != wantDecimals) {
			t.Fatalf("Round(%q, %d) = %q, want %d decimals", s, digits, got, wantDecimals)
		}
		if strings.HasPrefix(got, "-") && out.Sign() == 0 {
			t.Fatalf("Round(%q, %d) = %q: negative zero", s, digits, got)
		}
		// unit = 10^-digits
		unit := new(big.Rat).SetInt(new(big.Int).Exp(big.NewInt(10), big.NewInt(int64(abs(digits))), nil))
		if digits > 0 {
			unit.Inv(unit)
		}
		// 2|out - in| compared with unit
		twice := new(big.Rat).Sub(out, in)
		twice.Abs(twice).Add(twice, twice)
		switch twice.Cmp(unit) {
		case 1:
			t.Fatalf("Round(%q, %d, %s) = %s is more than half a unit away", s, digits, mode, got)
		case 0:
			if mode == HalfUp {
				if new(big.Rat).Abs(out).Cmp(new(big.Rat).Abs(in)) < 0 {
					t.Fatalf("Round(%q, %d, half-up) = %s: a tie went towards zero", s, digits, got)
				}
			} else {
				q := new(big.Rat).Quo(out, unit) // an integer
				if q.Num().Bit(0) != 0 {
					t.Fatalf("Round(%q, %d, %s) = %s: a tie went to an odd digit", s, digits, mode, got)
				}
			}
		}
		if again, err := Round(got, digits, mode); err != nil || again != got {
			t.Fatalf("Round(%q, %d, %s) = %s, rounding again gives %q, %v", s, digits, mode, got, again, err)
		}
	})
}

func abs(n int) int {
	if n < 0 {
		return -n
	}
	return n
}

func BenchmarkRound(b *testing.B) {
	for b.Loop() {
		if _, err := Round("99.62499999999999", 2, E29); err != nil {
			b.Fatal(err)
		}
	}
}

func BenchmarkDecimal(b *testing.B) {
	for b.Loop() {
		if _, err := Decimal(99.62499999999999); err != nil {
			b.Fatal(err)
		}
	}
}

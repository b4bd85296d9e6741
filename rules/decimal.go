// Package rules checks computed results against specification limits.
//
// A result is turned into the decimal the record shows (Decimal), rounded to
// the number of places the specification reports (Round) under the rounding
// rule the specification names (ASTM E29 rounding method, the pharmacopoeial
// round-half-up, or the E29 absolute method), and compared exactly with the
// limits (Limit.Check). Verdict combines the checked limits of one lot.
//
// All decimal work is done on decimal digit strings, never on binary floats:
// 101.45 has no exact float64 form, and rounding its binary value
// (101.4500000000000028…) would round up where the specification's rule
// rounds to even.
package rules

import (
	"errors"
	"fmt"
	"math"
	"strconv"
	"strings"
)

// Rounding selects how a result is rounded before it is compared with a limit.
type Rounding string

// The rounding rules a limit may name.
const (
	// E29 is the ASTM E29 rounding method: round once, directly from the
	// unrounded value, to the nearest unit; a tie (a 5 followed by nothing
	// but zeros) goes to the even digit.
	E29 Rounding = "astm-e29"
	// HalfUp rounds half away from zero, the pharmacopoeial convention
	// (a rejected part of half a unit or more raises the last digit).
	HalfUp Rounding = "half-up"
	// Absolute is the ASTM E29 absolute method: the unrounded value is
	// compared with the limit.
	Absolute Rounding = "absolute"
)

// ParseRounding returns the Rounding named by s.
func ParseRounding(s string) (Rounding, error) {
	switch r := Rounding(s); r {
	case E29, HalfUp, Absolute:
		return r, nil
	}
	return "", fmt.Errorf("unknown rounding %q: want %q, %q or %q", s, E29, HalfUp, Absolute)
}

// maxScale bounds the decimal places Round accepts and the magnitude of the
// decimals this package reads (1e-400 to 1e400, which covers every float64).
const maxScale = 400

// Round rounds the decimal string value ("101.45", "-0.125", "2.5e-4", "1E3")
// to digits decimal places under mode; a negative digits rounds to tens (-1),
// hundreds (-2) and so on. The arithmetic is exact decimal arithmetic.
//
// The result is a decimal string with exactly max(digits, 0) decimals
// ("0.10", "98.0", "1230") and never a negative zero ("-0.001" to two places
// is "0.00"). Negative values round symmetrically to positive ones.
//
// E29 rounds half to even, HalfUp half away from zero. Absolute does not
// round for conformance, so Round rounds half to even under it, for display.
func Round(value string, digits int, mode Rounding) (string, error) {
	if _, err := ParseRounding(string(mode)); err != nil {
		return "", err
	}
	if digits < -maxScale || digits > maxScale {
		return "", fmt.Errorf("cannot round to %d decimal places: want %d to %d", digits, -maxScale, maxScale)
	}
	d, err := parseDecimal(value)
	if err != nil {
		return "", err
	}
	return d.round(digits, mode == HalfUp).format(digits), nil
}

// Decimal returns the shortest decimal string that reads back as x, written
// without an exponent (2.5e-05 is "0.000025", 1e21 is
// "1000000000000000000000"). This is the number a record shows for x, and
// the one a result is rounded from. Negative zero is "0". NaN and
// infinities are errors.
func Decimal(x float64) (string, error) {
	if math.IsNaN(x) || math.IsInf(x, 0) {
		return "", fmt.Errorf("%v is not a finite number", x)
	}
	if x == 0 {
		return "0", nil
	}
	return strconv.FormatFloat(x, 'f', -1, 64), nil
}

// decimal is an exact decimal number: digs × 10^exp, negated if neg.
// digs has neither leading nor trailing zeros; zero is digs == "" (and
// neg == false), so every number has exactly one form.
type decimal struct {
	neg  bool
	digs string
	exp  int
}

var errSyntax = errors.New("want digits with an optional sign, decimal point and exponent, such as 99.5, -0.02 or 2.5e-4")

// parseDecimal reads an optionally signed decimal with an optional
// fraction and an optional exponent ("+1.5", ".5", "5.", "2.5E-4").
func parseDecimal(s string) (decimal, error) {
	bad := func(err error) (decimal, error) {
		return decimal{}, fmt.Errorf("invalid decimal %q: %w", s, err)
	}
	var d decimal
	i := 0
	if i < len(s) && (s[i] == '+' || s[i] == '-') {
		d.neg = s[i] == '-'
		i++
	}
	var mant []byte
	nDigits, frac, point := 0, 0, false
scan:
	for ; i < len(s); i++ {
		switch c := s[i]; {
		case c >= '0' && c <= '9':
			nDigits++
			if point {
				frac++
			}
			if c != '0' || len(mant) > 0 {
				mant = append(mant, c)
			}
		case c == '.' && !point:
			point = true
		default:
			break scan
		}
	}
	if nDigits == 0 {
		return bad(errSyntax)
	}
	exp := 0
	if i < len(s) && (s[i] == 'e' || s[i] == 'E') {
		i++
		eneg := false
		if i < len(s) && (s[i] == '+' || s[i] == '-') {
			eneg = s[i] == '-'
			i++
		}
		start := i
		for ; i < len(s) && s[i] >= '0' && s[i] <= '9'; i++ {
			if exp > 1e9 {
				return bad(errors.New("exponent is too large"))
			}
			exp = exp*10 + int(s[i]-'0')
		}
		if i == start {
			return bad(errSyntax)
		}
		if eneg {
			exp = -exp
		}
	}
	if i != len(s) {
		return bad(errSyntax)
	}
	// Leading zeros were left out of mant; those after the point are still
	// counted in frac, so the value is mant × 10^(exp-frac).
	exp -= frac
	t := strings.TrimRight(string(mant), "0")
	if t == "" {
		return decimal{}, nil
	}
	d.exp = exp + len(mant) - len(t)
	d.digs = t
	if a := d.exp + len(d.digs); a < -maxScale+1 || a > maxScale {
		return bad(fmt.Errorf("out of range: the magnitude must lie between 1e-%d and 1e%d", maxScale, maxScale))
	}
	return d, nil
}

// round returns d × 10^digits rounded to an integer, as a decimal with
// exp == 0 (its digits may then end in zeros). halfUp selects the tie rule:
// away from zero, or else to even.
func (d decimal) round(digits int, halfUp bool) decimal {
	if d.digs == "" {
		return d
	}
	// k is the number of trailing digits of digs that fall below the unit.
	k := -digits - d.exp
	n := len(d.digs)
	switch {
	case k <= 0:
		return decimal{neg: d.neg, digs: d.digs + strings.Repeat("0", -k)}
	case k > n:
		// The first rejected digit is a leading zero: less than half a unit.
		return decimal{}
	}
	kept, first := d.digs[:n-k], d.digs[n-k]
	// digs ends in a non-zero digit, so anything after first is non-zero.
	beyond := n-k+1 < n
	up := first > '5' || first == '5' && (beyond || halfUp || odd(kept))
	if up {
		kept = increment(kept)
	}
	if kept == "" {
		return decimal{}
	}
	return decimal{neg: d.neg, digs: kept}
}

func odd(s string) bool { return s != "" && (s[len(s)-1]-'0')%2 == 1 }

// increment adds one to the decimal digit string s ("" is zero).
func increment(s string) string {
	b := []byte(s)
	for i := len(b) - 1; i >= 0; i-- {
		if b[i] < '9' {
			b[i]++
			return string(b)
		}
		b[i] = '0'
	}
	return "1" + string(b)
}

// format writes the integer r (from round) scaled by 10^-digits with
// max(digits, 0) decimals.
func (r decimal) format(digits int) string {
	n := r.digs
	if n == "" {
		n = "0"
	}
	var s string
	switch {
	case digits <= 0 && r.digs == "":
		s = n
	case digits <= 0:
		s = n + strings.Repeat("0", -digits)
	default:
		if len(n) <= digits {
			n = strings.Repeat("0", digits+1-len(n)) + n
		}
		s = n[:len(n)-digits] + "." + n[len(n)-digits:]
	}
	if r.neg && r.digs != "" {
		return "-" + s
	}
	return s
}

// cmp compares d and e exactly: -1 if d < e, 0 if equal, +1 if d > e.
func (d decimal) cmp(e decimal) int {
	sd, se := d.sign(), e.sign()
	if sd != se || sd == 0 {
		return cmpInt(sd, se)
	}
	// Same sign, both non-zero: compare magnitudes, then apply the sign.
	m := cmpInt(d.exp+len(d.digs), e.exp+len(e.digs))
	if m == 0 {
		// Same leading place; neither has trailing zeros, so plain string
		// order is numeric order (a proper prefix is the smaller).
		m = strings.Compare(d.digs, e.digs)
	}
	return sd * m
}

func (d decimal) sign() int {
	switch {
	case d.digs == "":
		return 0
	case d.neg:
		return -1
	}
	return 1
}

func cmpInt(a, b int) int {
	switch {
	case a < b:
		return -1
	case a > b:
		return 1
	}
	return 0
}

package rules

import (
	"math"
	"math/big"
	"strings"
	"testing"
)

func TestCheckUSPTable(t *testing.T) {
	for _, c := range uspTable {
		l := Limit{Name: "assay", Min: c.min, Max: c.max, Digits: c.digits, Unit: "%"}
		v := Value{X: c.floatInput} // the binary float: Check must round its shortest decimal

		// check-values.md §6, USP table: USP rounded and "USP conforms" [S].
		l.Rounding = HalfUp
		r := l.Check(v)
		if r.Reported != c.usp || (r.Status == Pass) != c.uspOK {
			t.Errorf("half-up %s against %s: reported %q status %s (%s); USP table gives %s, conforms %v",
				c.unrounded, limitText(l), r.Reported, r.Status, r.Reason, c.usp, c.uspOK)
		}

		// check-values.md §6, USP table: E29 column [D]; the bold rows are
		// where the rules differ.
		l.Rounding = E29
		r = l.Check(v)
		if r.Reported != c.e29 || (r.Status == Pass) != c.e29OK {
			t.Errorf("E29 %s against %s: reported %q status %s (%s); E29 column gives %s, conforms %v",
				c.unrounded, limitText(l), r.Reported, r.Status, r.Reason, c.e29, c.e29OK)
		}

		// check-values.md §6, E29 absolute method [S]: the unrounded value
		// is compared with the limit; the expectation is computed here with
		// exact rationals.
		l.Rounding = Absolute
		r = l.Check(v)
		if want := withinRat(t, c.unrounded, c.min, c.max); (r.Status == Pass) != want || r.Reported != c.e29 {
			t.Errorf("absolute %s against %s: status %s (%s), reported %q; want conforms %v, reported %s",
				c.unrounded, limitText(l), r.Status, r.Reason, r.Reported, want, c.e29)
		}
	}
}

// withinRat reports whether min ≤ x ≤ max in exact rational arithmetic.
func withinRat(t *testing.T, x, min, max string) bool {
	t.Helper()
	rat := func(s string) *big.Rat {
		r, ok := new(big.Rat).SetString(s)
		if !ok {
			t.Fatalf("bad rational %q", s)
		}
		return r
	}
	v := rat(x)
	return (min == "" || v.Cmp(rat(min)) >= 0) && (max == "" || v.Cmp(rat(max)) <= 0)
}

func limitText(l Limit) string {
	return "[" + l.Min + ", " + l.Max + "]"
}

func TestCheck(t *testing.T) {
	assay := Limit{Name: "assay", Min: "99.5", Digits: 1, Unit: "%", Rounding: E29}
	unknown := Limit{Name: "any unknown", Max: "0.10", Digits: 2, Unit: "%", Rounding: E29}
	water := Limit{Name: "water", Min: "0.02", Max: "0.05", Digits: 2, Unit: "%", Rounding: HalfUp}
	absolute := Limit{Name: "assay", Min: "99.5", Digits: 1, Unit: "%", Rounding: Absolute}
	for _, c := range []struct {
		why      string
		l        Limit
		v        Value
		status   string
		reported string
		reason   string
	}{
		// The E29 tie rule of check-values.md §6 [M, corroborated S] applied by hand [D].
		{"E29 tie to even falls below the minimum", assay, Value{X: 99.45}, Fail, "99.4", "99.4 % is below the minimum 99.5 %"},
		{"E29 tie to even reaches the minimum", assay, Value{X: 99.55}, Pass, "99.6", ""},
		{"minimum is inclusive", assay, Value{X: 99.5}, Pass, "99.5", ""},
		{"one step rounding: 99.4501 is 99.5", assay, Value{X: 99.4501}, Pass, "99.5", ""},
		{"maximum is inclusive after rounding", unknown, Value{X: 0.104}, Pass, "0.10", ""},
		{"E29 tie to even stays at the maximum", unknown, Value{X: 0.105}, Pass, "0.10", ""},
		{"E29 tie to even goes above the maximum", unknown, Value{X: 0.115}, Fail, "0.12", "0.12 % is above the maximum 0.10 %"},
		{"negative values round symmetrically", unknown, Value{X: -0.125}, Pass, "-0.12", ""},
		// USP General Notices 7.20, half-up [S], against a range [D].
		{"range, half-up reaches the minimum", water, Value{X: 0.015}, Pass, "0.02", ""},
		{"range, below", water, Value{X: 0.0149}, Fail, "0.01", "0.01 % is below the minimum 0.02 %"},
		{"range, half-up passes the maximum", water, Value{X: 0.055}, Fail, "0.06", "0.06 % is above the maximum 0.05 %"},
		// check-values.md §6, E29 absolute method [S]: the unrounded value counts.
		{"absolute: no rounding up to the minimum", absolute, Value{X: 99.49}, Fail, "99.5", "unrounded 99.49 % is below the minimum 99.5 %"},
		{"absolute: exactly the minimum", absolute, Value{X: 99.5}, Pass, "99.5", ""},
		// Missing values (project rule: a value not found passes a maximum, fails a minimum).
		{"missing value passes a maximum", unknown, Value{Missing: "not detected"}, Pass, "not detected", ""},
		{"missing value fails a minimum", assay, Value{Missing: "not detected"}, Fail, "not detected", "no value: not detected"},
		{"missing value fails a range", water, Value{Missing: "below reporting threshold"}, Fail, "below reporting threshold", "no value: below reporting threshold"},
		// Unusable input.
		{"NaN", assay, Value{X: math.NaN()}, Erred, "", "value NaN is not a finite number"},
		{"infinity", unknown, Value{X: math.Inf(1)}, Erred, "", "value +Inf is not a finite number"},
		{"invalid limit", Limit{Name: "assay", Min: "99,5", Rounding: E29}, Value{X: 99.5}, Erred, "", `limit "assay": minimum: invalid decimal "99,5"`},
	} {
		r := c.l.Check(c.v)
		if r.Status != c.status || r.Reported != c.reported || !strings.HasPrefix(r.Reason, c.reason) || (c.reason == "") != (r.Reason == "") {
			t.Errorf("%s: got status %s, reported %q, reason %q; want %s, %q, %q",
				c.why, r.Status, r.Reported, r.Reason, c.status, c.reported, c.reason)
		}
		if r.Name != c.l.Name || r.Min != c.l.Min || r.Max != c.l.Max || r.Digits != c.l.Digits ||
			r.Unit != c.l.Unit || r.Rounding != c.l.Rounding {
			t.Errorf("%s: result does not carry the limit: %+v", c.why, r)
		}
		if noValue := c.v.Missing != "" || c.status == Erred; noValue != (r.Value == nil) || !noValue && *r.Value != c.v.X {
			t.Errorf("%s: Value = %v, want the unrounded value %v (nil if none)", c.why, r.Value, c.v.X)
		}
	}
}

func TestValidate(t *testing.T) {
	for _, c := range []struct {
		l    Limit
		want string // "" for valid, else part of the message
	}{
		{Limit{Name: "assay", Min: "99.5", Digits: 1, Rounding: E29}, ""},
		{Limit{Name: "assay", Min: "1e2", Max: "100", Digits: 0, Rounding: HalfUp}, ""},
		{Limit{Name: "ppm", Max: "500", Digits: -1, Rounding: Absolute}, ""},
		{Limit{Min: "1", Rounding: E29}, "limit has no name"},
		{Limit{Name: "assay", Digits: 1, Rounding: E29}, `limit "assay": no bound`},
		{Limit{Name: "assay", Min: "abc", Rounding: E29}, `minimum: invalid decimal "abc"`},
		{Limit{Name: "assay", Max: "1..2", Rounding: E29}, `maximum: invalid decimal "1..2"`},
		{Limit{Name: "assay", Min: "101.0", Max: "99.0", Rounding: E29}, "minimum 101.0 is above maximum 99.0"},
		{Limit{Name: "assay", Min: "1", Rounding: "nearest"}, `unknown rounding "nearest"`},
		{Limit{Name: "assay", Min: "1"}, `unknown rounding ""`},
		{Limit{Name: "assay", Min: "1", Digits: 1000, Rounding: E29}, "1000 decimal places is out of range"},
	} {
		err := c.l.Validate()
		switch {
		case c.want == "" && err != nil:
			t.Errorf("Validate(%+v) = %v, want nil", c.l, err)
		case c.want != "" && (err == nil || !strings.Contains(err.Error(), c.want)):
			t.Errorf("Validate(%+v) = %v, want an error containing %q", c.l, err, c.want)
		}
	}
}

func TestErrored(t *testing.T) {
	l := Limit{Name: "imp-a", Max: "0.05", Digits: 2, Unit: "%", Rounding: E29}
	r := Errored(l, "component imp-a has no response factor")
	if r.Status != Erred || r.Reason != "component imp-a has no response factor" || r.Value != nil || r.Name != "imp-a" || r.Max != "0.05" {
		t.Errorf("Errored = %+v", r)
	}
	if r := Errored(l, ""); r.Reason == "" {
		t.Error("Errored with no reason gives no reason")
	}
}

func TestVerdict(t *testing.T) {
	p, f, e := Result{Status: Pass}, Result{Status: Fail}, Result{Status: Erred}
	// The combination rule of the project's record: a failure decides, an
	// error leaves the lot undetermined (common practice: an incomplete
	// result set cannot release a lot).
	for _, c := range []struct {
		rs   []Result
		want string
	}{
		{nil, Pass},
		{[]Result{p}, Pass},
		{[]Result{p, p}, Pass},
		{[]Result{p, f}, Fail},
		{[]Result{e, p}, Undetermined},
		{[]Result{e, f, p}, Fail},
		{[]Result{f, e}, Fail},
		{[]Result{p, {Status: ""}}, Undetermined},
	} {
		if got := Verdict(c.rs); got != c.want {
			t.Errorf("Verdict(%v) = %s, want %s", c.rs, got, c.want)
		}
	}
}

func BenchmarkCheck(b *testing.B) {
	l := Limit{Name: "assay", Min: "99.5", Max: "100.5", Digits: 1, Unit: "%", Rounding: E29}
	v := Value{X: 99.62499999999999}
	for b.Loop() {
		if r := l.Check(v); r.Status != Pass {
			b.Fatal(r.Reason)
		}
	}
}

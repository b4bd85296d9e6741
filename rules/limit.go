package rules

import (
	"errors"
	"fmt"
)

// The status of a checked limit, and the verdict on a set of them.
const (
	Pass         = "pass"         // the value conforms
	Fail         = "fail"         // the value does not conform
	Erred        = "error"        // the value could not be computed or the limit is unusable
	Undetermined = "undetermined" // verdict: nothing failed, but something erred
)

// Limit is one specification line: bounds on one result, the number of
// decimal places the result is reported to, and the rounding rule.
type Limit struct {
	Name string
	// Min and Max are the bounds as decimal strings, both inclusive; ""
	// means no bound, and at least one must be set. A limit is a fixed
	// number: it is never rounded.
	Min, Max string
	// Digits is the number of decimal places the result is reported and
	// rounded to (negative: tens, hundreds, ...).
	Digits int
	Unit   string
	// Rounding is the rule applied before comparison; it must be set.
	Rounding Rounding
}

// Validate reports what makes the limit unusable: no name, no bound, a bound
// that is not a decimal, a minimum above the maximum, decimal places out of
// range or an unknown rounding rule.
func (l Limit) Validate() error {
	_, _, err := l.bounds()
	return err
}

// bounds validates l and returns its parsed bounds (nil: no bound).
func (l Limit) bounds() (lo, hi *decimal, err error) {
	wrap := func(err error) (*decimal, *decimal, error) {
		return nil, nil, fmt.Errorf("limit %q: %w", l.Name, err)
	}
	if l.Name == "" {
		return nil, nil, errors.New("limit has no name")
	}
	if l.Min == "" && l.Max == "" {
		return wrap(errors.New("no bound: set a minimum, a maximum or both"))
	}
	if _, err := ParseRounding(string(l.Rounding)); err != nil {
		return wrap(err)
	}
	if l.Digits < -maxScale || l.Digits > maxScale {
		return wrap(fmt.Errorf("%d decimal places is out of range: want %d to %d", l.Digits, -maxScale, maxScale))
	}
	if l.Min != "" {
		d, err := parseDecimal(l.Min)
		if err != nil {
			return wrap(fmt.Errorf("minimum: %w", err))
		}
		lo = &d
	}
	if l.Max != "" {
		d, err := parseDecimal(l.Max)
		if err != nil {
			return wrap(fmt.Errorf("maximum: %w", err))
		}
		hi = &d
	}
	if lo != nil && hi != nil && lo.cmp(*hi) > 0 {
		return wrap(fmt.Errorf("minimum %s is above maximum %s", l.Min, l.Max))
	}
	return lo, hi, nil
}

// Value is what a pipeline computed for a limit.
type Value struct {
	X float64
	// Missing is "" when X is valid; otherwise it says why there is no
	// number ("not detected", "below reporting threshold", ...).
	Missing string
}

// Result is one checked limit.
type Result struct {
	Name string `json:"name"`
	// Value is the unrounded value; nil when the value is missing or not
	// finite (JSON has no NaN).
	Value *float64 `json:"value"`
	// Reported is the value as reported: rounded to Digits (half to even
	// under Absolute, for display only), or the Missing text.
	Reported string   `json:"reported"`
	Min      string   `json:"min,omitempty"`
	Max      string   `json:"max,omitempty"`
	Digits   int      `json:"digits"`
	Unit     string   `json:"unit,omitempty"`
	Rounding Rounding `json:"rounding"`
	Status   string   `json:"status"` // Pass, Fail or Erred
	// Reason says why the limit failed or erred; "" on pass.
	Reason string `json:"reason,omitempty"`
}

// Check checks v against l.
//
// The value is first written as its shortest decimal (Decimal): that is the
// number the record shows, and the one the specification's rounding applies
// to. Rounding the binary value instead would be wrong: 101.45 is stored as
// 101.4500000000000028…, which E29 would round to 101.5, where 101.45 rounds
// to 101.4. The decimal is then rounded to l.Digits under l.Rounding and
// compared exactly with the bounds. Under Absolute the unrounded decimal is
// compared, and Reported still shows the value rounded half to even.
//
// A missing value passes a limit with only a maximum (Reported is the
// Missing text) and fails a limit with a minimum. An unusable limit or a
// value that is not finite gives Status Erred.
func (l Limit) Check(v Value) Result {
	r := Result{Name: l.Name, Min: l.Min, Max: l.Max, Digits: l.Digits, Unit: l.Unit, Rounding: l.Rounding}
	lo, hi, err := l.bounds()
	if err != nil {
		r.Status, r.Reason = Erred, err.Error()
		return r
	}
	if v.Missing != "" {
		r.Reported = v.Missing
		if lo != nil {
			r.Status, r.Reason = Fail, "no value: "+v.Missing
		} else {
			r.Status = Pass
		}
		return r
	}
	s, err := Decimal(v.X)
	if err != nil {
		r.Status, r.Reason = Erred, "value "+err.Error()
		return r
	}
	x := v.X
	r.Value = &x
	exact, err := parseDecimal(s)
	if err != nil { // cannot happen for a finite float64
		r.Status, r.Reason = Erred, err.Error()
		return r
	}
	rounded := exact.round(l.Digits, l.Rounding == HalfUp)
	r.Reported = rounded.format(l.Digits)
	compared, shown := rounded, r.Reported
	if l.Rounding == Absolute {
		compared, shown = exact, "unrounded "+s
	} else {
		// Scale the rounded integer back to the value.
		compared.exp = -l.Digits
		compared = normalize(compared)
	}
	switch {
	case lo != nil && compared.cmp(*lo) < 0:
		r.Status, r.Reason = Fail, fmt.Sprintf("%s%s is below the minimum %s%s", shown, l.unit(), l.Min, l.unit())
	case hi != nil && compared.cmp(*hi) > 0:
		r.Status, r.Reason = Fail, fmt.Sprintf("%s%s is above the maximum %s%s", shown, l.unit(), l.Max, l.unit())
	default:
		r.Status = Pass
	}
	return r
}

func (l Limit) unit() string {
	if l.Unit == "" {
		return ""
	}
	return " " + l.Unit
}

// normalize strips trailing zeros from d.digs into the exponent.
func normalize(d decimal) decimal {
	for len(d.digs) > 0 && d.digs[len(d.digs)-1] == '0' {
		d.digs = d.digs[:len(d.digs)-1]
		d.exp++
	}
	return d
}

// Errored is the result of a limit whose value could not be computed; reason
// says why.
func Errored(l Limit, reason string) Result {
	if reason == "" {
		reason = "the value could not be computed"
	}
	return Result{Name: l.Name, Min: l.Min, Max: l.Max, Digits: l.Digits, Unit: l.Unit, Rounding: l.Rounding,
		Status: Erred, Reason: reason}
}

// Verdict combines checked limits: Fail if any failed, else Undetermined if
// any erred (any status other than Pass or Fail counts as erred), else Pass.
// No results pass.
func Verdict(rs []Result) string {
	verdict := Pass
	for _, r := range rs {
		switch r.Status {
		case Pass:
		case Fail:
			return Fail
		default:
			verdict = Undetermined
		}
	}
	return verdict
}

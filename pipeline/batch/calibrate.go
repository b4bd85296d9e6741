package batch

import (
	"fmt"
	"math"
	"slices"
	"strconv"

	"lotgate/pipeline"
	"lotgate/rules"
	"lotgate/steps/calib"
)

// curve is one component's calibration as the amounts are read from it.
type curve struct {
	comp pipeline.CalComponent
	// fit is the fitted curve; nil for the response-factor model or when
	// the calibration failed.
	fit *calib.Fit
	// rf is the response factor of the response-factor model.
	rf float64
	// lo and hi bound the calibrated range.
	lo, hi float64
	// failed says why the calibration cannot be used ("" when it can).
	failed string
}

// amount reads an amount from a response: the amount, whether it lies in
// the calibrated range, or an error for a response the curve cannot be
// read at.
func (c *curve) amount(y float64) (x float64, inRange bool, err error) {
	if c.fit != nil {
		return c.fit.Amount(y)
	}
	x = y / c.rf
	return x, x >= c.lo && x <= c.hi*(1+1e-9), nil
}

// calibrate fits every calibrated component's curve to the calibration
// injections and checks it: every point must be there, every level's
// back-calculated amount within the accepted deviation, r² at least the
// least accepted. A component whose calibration fails invalidates every
// sample of the sequence.
func (e *evaluation) calibrate() {
	cal := e.p.Calibration
	if cal == nil {
		return
	}
	e.cal = &CalibrationRec{Method: cal.Method, InternalStandard: cal.InternalStandardName, Unit: cal.Unit}
	for _, cc := range cal.Components {
		c, rec := e.fitComponent(cc)
		e.curves[cc.Name] = c
		e.cal.Components = append(e.cal.Components, rec)
		if c.failed != "" {
			reason := fmt.Sprintf("calibration of %s failed: %s", cc.Name, c.failed)
			for _, o := range e.samples() {
				o.invalidate(reason)
			}
		}
	}
}

// fitComponent fits and checks one component's calibration.
func (e *evaluation) fitComponent(cc pipeline.CalComponent) (*curve, CalComponentRec) {
	cal := e.p.Calibration
	c := &curve{comp: cc}
	rec := CalComponentRec{Component: cc.Name, Model: cc.Model, Weighting: string(cc.Weighting), Response: "area",
		MaxDeviation: cc.MaxDeviation, MaxDeviationLowest: cc.MaxDeviationLowest, MinR2: cc.MinR2}
	if cal.Method == pipeline.InternalStandard {
		rec.Response = "area ratio to " + cal.InternalStandardName
	}
	var reasons []string
	var xs, ys []float64
	var used []int // indices into rec.Points of the points fitted
	for _, o := range e.outs {
		if o.Role != RoleCalibration || o.Standard == nil {
			continue
		}
		amt, ok := o.Standard.Amount(cc.Name)
		if !ok {
			continue
		}
		pt := CalPointRec{Injection: o.Number, ID: o.ID, Standard: o.Standard.Name, Level: o.Standard.Level, Amount: amt, Status: rules.Pass}
		switch {
		case o.Record == nil:
			pt.Status, pt.Reason = StatusError, "could not be processed"
		default:
			r := e.responseOf(o.Record, cc.Name)
			if !r.ok() {
				pt.Status, pt.Reason = rules.Fail, r.missing+r.problem
			} else {
				y := r.y
				pt.Response = &y
				xs, ys = append(xs, amt), append(ys, y)
				used = append(used, len(rec.Points))
			}
		}
		if pt.Status != rules.Pass {
			reasons = append(reasons, fmt.Sprintf("injection %d (%s): %s", o.Number, o.ID, pt.Reason))
			o.fail(fmt.Sprintf("calibration point of %s: %s", cc.Name, pt.Reason))
		}
		rec.Points = append(rec.Points, pt)
	}
	if len(xs) > 0 {
		c.lo, c.hi = slices.Min(xs), slices.Max(xs)
	}
	if len(reasons) == 0 {
		if err := c.fitPoints(xs, ys); err != nil {
			reasons = append(reasons, err.Error())
		}
	}
	rec.RangeMin, rec.RangeMax = c.lo, c.hi
	if c.fit != nil || c.rf > 0 {
		c.describe(&rec, xs, ys, used)
		reasons = append(reasons, c.accept(&rec, used, e.outs)...)
	}
	rec.Status = rules.Pass
	if len(reasons) > 0 {
		rec.Status, rec.Reasons = rules.Fail, reasons
		c.failed = reasons[0]
		if len(reasons) > 1 {
			c.failed += fmt.Sprintf(" (and %d more)", len(reasons)-1)
		}
	}
	return c, rec
}

// fitPoints fits the curve of the component's model to the points.
func (c *curve) fitPoints(xs, ys []float64) error {
	if c.comp.Model != pipeline.ResponseFactorModel {
		f, err := calib.FitCurve(xs, ys, calib.Model(c.comp.Model), c.comp.Weighting)
		if err != nil {
			return err
		}
		c.fit = f
		c.lo, c.hi = f.XMin, f.XMax
		return nil
	}
	levels := slices.Compact(slices.Sorted(slices.Values(xs)))
	if len(levels) != 1 {
		return fmt.Errorf("the response-factor model uses the standards of one level, but they give %d levels; use linear-origin or linear", len(levels))
	}
	sum := 0.0
	for i := range xs {
		rf, err := calib.ResponseFactor(ys[i], xs[i])
		if err != nil {
			return err
		}
		sum += rf
	}
	c.rf = sum / float64(len(xs))
	c.lo, c.hi = 0, levels[0]
	return nil
}

// describe fills the curve's coefficients, statistics, ICH limits and
// each fitted point's prediction, residual and back-calculated amount.
func (c *curve) describe(rec *CalComponentRec, xs, ys []float64, used []int) {
	if f := c.fit; f != nil {
		rec.Coefficients, rec.StandardErrors = f.Coef, f.SE
		r2, s := f.R2, f.ResidualSD
		rec.R2, rec.ResidualSD, rec.DF = &r2, &s, f.DF
	} else {
		rec.Coefficients = []float64{0, c.rf}
	}
	if lod, loq, ok := ichLimits(xs, ys); ok {
		rec.LOD, rec.LOQ = &lod, &loq
	}
	for k, i := range used {
		pt := &rec.Points[i]
		pred := c.predict(xs[k])
		res := ys[k] - pred
		pt.Predicted, pt.Residual = &pred, &res
		if x, _, err := c.amount(ys[k]); err == nil {
			pt.BackCalculated = &x
			if xs[k] != 0 {
				acc := 100 * x / xs[k]
				pt.Accuracy = &acc
			}
		}
	}
}

// predict returns the response the calibration gives for amount x.
func (c *curve) predict(x float64) float64 {
	if c.fit != nil {
		return c.fit.Predict(x)
	}
	return c.rf * x
}

// accept checks each point's back-calculated accuracy and the curve's r²,
// marking failing points, and returns the reasons for failing.
func (c *curve) accept(rec *CalComponentRec, used []int, outs []*Outcome) []string {
	var reasons []string
	lowest := math.Inf(1)
	for _, i := range used {
		lowest = math.Min(lowest, rec.Points[i].Amount)
	}
	for _, i := range used {
		pt := &rec.Points[i]
		limit := c.comp.MaxDeviation
		if pt.Amount == lowest {
			limit = c.comp.MaxDeviationLowest
		}
		switch {
		case pt.BackCalculated == nil:
			pt.Status, pt.Reason = rules.Fail, "the curve cannot be read at its response"
		case pt.Accuracy == nil:
			continue // a zero-amount standard has no accuracy
		case math.Abs(*pt.Accuracy-100) > limit:
			pt.Status, pt.Reason = rules.Fail, fmt.Sprintf("back-calculated %s of %s (%s %%), beyond ±%s %%",
				num(*pt.BackCalculated), num(pt.Amount), num(round(*pt.Accuracy, 1)), num(limit))
		default:
			continue
		}
		reasons = append(reasons, fmt.Sprintf("injection %d (%s): %s", pt.Injection, pt.ID, pt.Reason))
		for _, o := range outs {
			if o.Number == pt.Injection {
				o.fail(fmt.Sprintf("calibration point of %s: %s", c.comp.Name, pt.Reason))
			}
		}
	}
	if c.comp.MinR2 > 0 && rec.R2 != nil && *rec.R2 < c.comp.MinR2 {
		reasons = append(reasons, fmt.Sprintf("r² %s is below the least accepted %s", num(round(*rec.R2, 6)), num(c.comp.MinR2)))
	}
	return reasons
}

// ichLimits returns the ICH Q2 limits of detection and quantitation from
// the unweighted straight line through the points: σ its residual SD, S its
// slope. It needs at least 3 points at 2 or more amounts.
func ichLimits(xs, ys []float64) (lod, loq float64, ok bool) {
	if len(xs) < 3 {
		return 0, 0, false
	}
	f, err := calib.FitCurve(xs, ys, calib.Linear, calib.Unweighted)
	if err != nil {
		return 0, 0, false
	}
	return calib.LOD(f.ResidualSD, f.Coef[1]), calib.LOQ(f.ResidualSD, f.Coef[1]), true
}

// readAmounts reads the amount of every calibrated component in every
// processed injection, for the limit expressions and the records.
func (e *evaluation) readAmounts() {
	cal := e.p.Calibration
	for _, o := range e.outs {
		if o.Record == nil || cal == nil {
			continue
		}
		o.amounts = map[string]pipeline.Amount{}
		for _, cc := range cal.Components {
			o.amounts[cc.Name] = e.amountIn(o, cc.Name)
		}
	}
}

// amountIn is a component's amount in an injection as limits see it.
func (e *evaluation) amountIn(o *Outcome, comp string) pipeline.Amount {
	c := e.curves[comp]
	unit := e.p.Calibration.Unit
	if c.failed != "" {
		return pipeline.Amount{Problem: "its calibration failed"}
	}
	r := e.responseOf(o.Record, comp)
	switch {
	case r.problem != "":
		return pipeline.Amount{Problem: r.problem}
	case r.missing != "":
		return pipeline.Amount{Missing: r.missing}
	}
	x, inRange, err := c.amount(r.y)
	if err != nil {
		return pipeline.Amount{Problem: err.Error()}
	}
	d := o.dilution()
	switch {
	case inRange:
		return pipeline.Amount{X: x * d}
	case x < c.lo:
		return pipeline.Amount{Missing: fmt.Sprintf("below the calibrated range (< %s %s)", num(c.lo*d), unit)}
	}
	return pipeline.Amount{Problem: fmt.Sprintf("%s %s is above the calibrated range (%s–%s %s): not extrapolated; dilute and inject again",
		num(x*d), unit, num(c.lo*d), num(c.hi*d), unit)}
}

// dilution is the factor applied to a sample's amounts (1 for standards).
func (o *Outcome) dilution() float64 {
	if o.Role == RoleSample && o.Dilution > 0 {
		return o.Dilution
	}
	return 1
}

// amountRec is a component's amount in an injection, for its record.
func (e *evaluation) amountRec(o *Outcome, comp, unit string) pipeline.AmountRec {
	ar := pipeline.AmountRec{Component: comp, Unit: unit}
	c := e.curves[comp]
	r := e.responseOf(o.Record, comp)
	if r.ok() {
		y := r.y
		ar.Response = &y
	}
	switch {
	case c.failed != "":
		ar.Note = "no amount: the calibration failed"
	case !r.ok():
		ar.Note = r.missing + r.problem
	default:
		x, inRange, err := c.amount(r.y)
		if err != nil {
			ar.Note = err.Error()
			break
		}
		x *= o.dilution()
		ar.Amount, ar.InRange = &x, inRange
		if !inRange {
			a := o.amounts[comp]
			ar.Note = "outside the calibrated range: " + a.Missing + a.Problem
		}
	}
	return ar
}

// num writes x as its shortest decimal.
func num(x float64) string { return strconv.FormatFloat(x, 'g', -1, 64) }

// round rounds x to the given decimals for messages (half to even on the
// shortest decimal, as the limits round).
func round(x float64, digits int) float64 {
	d, err := rules.Decimal(x)
	if err != nil {
		return x
	}
	s, err := rules.Round(d, digits, rules.E29)
	if err != nil {
		return x
	}
	v, err := strconv.ParseFloat(s, 64)
	if err != nil {
		return x
	}
	return v
}

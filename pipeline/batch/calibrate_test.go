package batch

import (
	"fmt"
	"math"
	"strings"
	"testing"

	"lotgate/pipeline"
)

// calPipeline is a pipeline calibrating A with the given calibration
// attributes; B may serve as internal standard.
func calPipeline(t testing.TB, attrs string) *pipeline.Pipeline {
	t.Helper()
	return mustPipeline(t, `pipeline "cal" {
  revision = 1
}
detect {
}
integrate {
}
identify {
  component "A" {
    rt     = 2.0
    window = 0.1
  }
  component "B" {
    rt     = 3.0
    window = 0.1
  }
}
calibration {
  unit = "µg/mL"
`+attrs+`
}
limit "A" {
  value = component.A.amount
  max   = 1000
}
`)
}

// areaRecord is a record in which A and B were found with these areas
// (0: not found).
func areaRecord(a, b float64) *pipeline.Record {
	rec := &pipeline.Record{}
	for i, c := range []struct {
		name string
		area float64
	}{{"A", a}, {"B", b}} {
		if c.area == 0 {
			rec.Components = append(rec.Components, pipeline.ComponentRec{Name: c.name, Status: "not-detected"})
			continue
		}
		n, area := len(rec.Peaks)+1, c.area
		rec.Peaks = append(rec.Peaks, pipeline.PeakRec{Number: n, Component: c.name, RTMin: 2 + float64(i), Area: c.area})
		rec.Components = append(rec.Components, pipeline.ComponentRec{Name: c.name, Status: "found", Peak: &n, Area: &area})
	}
	return rec
}

// calOutcomes makes one calibration injection per (amount, A area, B area)
// and one sample injection per (A area, B area).
func calOutcomes(points [][3]float64, samples [][2]float64) []*Outcome {
	var outs []*Outcome
	for i, p := range points {
		st := &Standard{Name: fmt.Sprintf("L%d", i+1), Level: i + 1, Amounts: []StandardAmount{{Component: "A", Amount: p[0]}}}
		outs = append(outs, &Outcome{Injection: &Injection{Number: len(outs) + 1, ID: st.Name, Role: RoleCalibration, Standard: st},
			Record: areaRecord(p[1], p[2])})
	}
	for i, s := range samples {
		outs = append(outs, &Outcome{Injection: &Injection{Number: len(outs) + 1, ID: fmt.Sprintf("S%d", i+1), Role: RoleSample,
			Lot: "L", Sample: fmt.Sprintf("S%d", i+1), Replicate: 1, Dilution: 1}, Record: areaRecord(s[0], s[1])})
	}
	return outs
}

// The calibration of a sequence reproduces the weighted least-squares
// worked example of check-values.md §7 [D] (tolerance 1e-8, as stated
// there): x = 1, 2, 5, 10, 20, 50; y = 1.2, 2.1, 5.3, 9.8, 20.6, 49.0.
func TestCalibrationWeightedExample(t *testing.T) {
	x := []float64{1, 2, 5, 10, 20, 50}
	y := []float64{1.2, 2.1, 5.3, 9.8, 20.6, 49.0}
	var pts [][3]float64
	for i := range x {
		pts = append(pts, [3]float64{x[i], y[i], 0})
	}
	cases := []struct {
		weighting              string
		slope, intercept, resW float64
	}{
		{"none", 0.97809506, 0.32127252, 0.41994691},
		{"1/x", 0.98599876, 0.20535159, 0.10415676},
		{"1/x2", 0.98827983, 0.19803264, 0.03376591},
	}
	for _, c := range cases {
		p := calPipeline(t, fmt.Sprintf("  weighting = %q\n  max_deviation = 30\n  component \"A\" {}", c.weighting))
		res := evaluate(p, &Sequence{}, calOutcomes(pts, nil), testAt)
		cal := res.Calibration.Components[0]
		if len(cal.Coefficients) != 2 || cal.ResidualSD == nil {
			t.Fatalf("%s: %+v", c.weighting, cal)
		}
		for _, v := range []struct {
			name      string
			got, want float64
		}{{"slope", cal.Coefficients[1], c.slope}, {"intercept", cal.Coefficients[0], c.intercept}, {"s_w", *cal.ResidualSD, c.resW}} {
			if math.Abs(v.got-v.want) > 1e-8 {
				t.Errorf("w = %s: %s = %.10f, want %.8f", c.weighting, v.name, v.got, v.want)
			}
		}
		if cal.RangeMin != 1 || cal.RangeMax != 50 || len(cal.Points) != 6 || cal.Points[0].Residual == nil {
			t.Errorf("w = %s: range %g–%g, %d points", c.weighting, cal.RangeMin, cal.RangeMax, len(cal.Points))
		}
	}
}

// LOD and LOQ follow ICH Q2, 3.3σ/S and 10σ/S, with σ the residual SD and S
// the slope of the unweighted line: check-values.md §7 [D, also S], σ =
// 0.0025 and S = 1250 give LOD 6.6e-6 and LOQ 2.0e-5 µg/mL. The points lie
// on y = 1250·x plus residuals orthogonal to the line, with SD 0.0025.
func TestCalibrationICHLimits(t *testing.T) {
	c := 0.0025 * math.Sqrt(0.3) // Σr² = 10c², s = c·√(10/3) = 0.0025
	r := []float64{c, -2 * c, 0, 2 * c, -c}
	var pts [][3]float64
	for i := range 5 {
		x := float64(i + 1)
		pts = append(pts, [3]float64{x, 1250*x + r[i], 0})
	}
	p := calPipeline(t, "  weighting = \"1/x\"\n  component \"A\" {}")
	cal := evaluate(p, &Sequence{}, calOutcomes(pts, nil), testAt).Calibration.Components[0]
	if cal.LOD == nil || cal.LOQ == nil {
		t.Fatalf("no LOD/LOQ: %+v", cal)
	}
	if math.Abs(*cal.LOD-6.6e-6)/6.6e-6 > 1e-9 || math.Abs(*cal.LOQ-2.0e-5)/2.0e-5 > 1e-9 {
		t.Errorf("LOD %g, LOQ %g; want 6.6e-6 and 2.0e-5", *cal.LOD, *cal.LOQ)
	}
}

// A single level calibrates with its mean response factor (area/amount,
// common practice); the calibrated range runs from 0 to the level.
func TestResponseFactor(t *testing.T) {
	pts := [][3]float64{{10, 20.2, 0}, {10, 19.8, 0}, {10, 20.0, 0}} // RF 2.02, 1.98, 2.00: mean 2.00
	p := calPipeline(t, "  model = \"response-factor\"\n  component \"A\" {}")
	res := evaluate(p, &Sequence{}, calOutcomes(pts, [][2]float64{{15, 0}, {24, 0}}), testAt)
	cal := res.Calibration.Components[0]
	if cal.Status != "pass" || math.Abs(cal.Coefficients[1]-2) > 1e-12 || cal.RangeMin != 0 || cal.RangeMax != 10 {
		t.Fatalf("response factor: %+v", cal)
	}
	in, above := res.Outcomes[3].Record.Batch.Amounts[0], res.Outcomes[4].Record.Batch.Amounts[0]
	if in.Amount == nil || math.Abs(*in.Amount-7.5) > 1e-12 || !in.InRange {
		t.Errorf("area 15: %+v, want 7.5 in range", in)
	}
	if above.Amount == nil || math.Abs(*above.Amount-12) > 1e-12 || above.InRange || !strings.Contains(above.Note, "above the calibrated range") {
		t.Errorf("area 24: %+v, want 12, flagged above the range", above)
	}
	// More than one level is not a single-point calibration.
	pts[2][0] = 20
	cal = evaluate(p, &Sequence{}, calOutcomes(pts, nil), testAt).Calibration.Components[0]
	if cal.Status != "fail" || !strings.Contains(cal.Reasons[0], "one level") {
		t.Errorf("two levels: %s %v", cal.Status, cal.Reasons)
	}
}

// With an internal standard, amounts come from the area ratio, so that the
// injected volume cancels (common practice): standards and sample injected
// with volumes 10 % apart give the sample's amount exactly.
func TestInternalStandard(t *testing.T) {
	var pts [][3]float64
	for i, f := range []float64{1.0, 1.1, 0.9, 1.05, 0.95} {
		x := 10 * float64(i+1)
		pts = append(pts, [3]float64{x, 2 * x * f, 40 * f})
	}
	p := calPipeline(t, "  method = \"internal\"\n  internal_standard = \"B\"\n  component \"A\" {}")
	res := evaluate(p, &Sequence{}, calOutcomes(pts, [][2]float64{{2 * 25 * 1.1, 40 * 1.1}, {50, 0}}), testAt)
	cal := res.Calibration.Components[0]
	if cal.Status != "pass" || cal.Response != "area ratio to B" {
		t.Fatalf("calibration: %s %v %q", cal.Status, cal.Reasons, cal.Response)
	}
	am := res.Outcomes[5].Record.Batch.Amounts[0]
	if am.Amount == nil || math.Abs(*am.Amount-25) > 1e-9 || am.Response == nil || math.Abs(*am.Response-1.25) > 1e-12 {
		t.Errorf("sample: %+v, want ratio 1.25 and 25 µg/mL", am)
	}
	// Without the internal standard's peak no amount can be given, and a
	// limit using it cannot be checked.
	noIS := res.Outcomes[6].Record
	if noIS.Batch.Amounts[0].Amount != nil || noIS.Limits[0].Status != "error" || !strings.Contains(noIS.Limits[0].Reason, "internal standard B") {
		t.Errorf("no internal standard: %+v, limit %+v", noIS.Batch.Amounts[0], noIS.Limits[0])
	}
}

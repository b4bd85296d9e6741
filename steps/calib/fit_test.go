package calib

import (
	"errors"
	"math"
	"strings"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// Worked weighted-least-squares example, check-values.md §7 [D].
var (
	wlsX = []float64{1, 2, 5, 10, 20, 50}
	wlsY = []float64{1.2, 2.1, 5.3, 9.8, 20.6, 49.0}
)

func TestWeightedExample(t *testing.T) {
	// check-values.md §7, worked example [D]; tolerance 1e-8 as stated there.
	for _, tc := range []struct {
		w                   Weighting
		slope, intercept, s float64
	}{
		{Unweighted, 0.97809506, 0.32127252, 0.41994691},
		{InverseX, 0.98599876, 0.20535159, 0.10415676},
		{InverseXSquared, 0.98827983, 0.19803264, 0.03376591},
	} {
		f, err := FitCurve(wlsX, wlsY, Linear, tc.w)
		if err != nil {
			t.Fatal(tc.w, err)
		}
		for _, c := range []struct {
			name      string
			got, want float64
		}{{"slope", f.Coef[1], tc.slope}, {"intercept", f.Coef[0], tc.intercept}, {"s_w", f.ResidualSD, tc.s}} {
			if math.Abs(c.got-c.want) > 1e-8 {
				t.Errorf("w = %s: %s = %.10f, want %.8f", tc.w, c.name, c.got, c.want)
			}
		}
	}
}

// TestWeightedTextbookStatistics checks the weighted fits against the
// closed-form weighted least-squares formulas of check-values.md §7 [M,
// standard formulas] for b1, b0 and s_w, and the textbook standard errors
// SE(b1) = s_w/√Sxx, SE(b0) = s_w·√(1/Σw + x̄_w²/Sxx), Sxx = Σw(x − x̄_w)²
// (from memory, standard formulas), and the weighted centred R².
func TestWeightedTextbookStatistics(t *testing.T) {
	for _, w := range []Weighting{Unweighted, InverseX, InverseXSquared} {
		f, err := FitCurve(wlsX, wlsY, Linear, w)
		if err != nil {
			t.Fatal(err)
		}
		var sw, swx, swy, swxx, swxy float64
		wt := make([]float64, len(wlsX))
		for i, x := range wlsX {
			wt[i] = map[Weighting]float64{Unweighted: 1, InverseX: 1 / x, InverseXSquared: 1 / (x * x)}[w]
			y := wlsY[i]
			sw += wt[i]
			swx += wt[i] * x
			swy += wt[i] * y
			swxx += wt[i] * x * x
			swxy += wt[i] * x * y
		}
		b1 := (sw*swxy - swx*swy) / (sw*swxx - swx*swx)
		b0 := (swy - b1*swx) / sw
		xm, ym := swx/sw, swy/sw
		var ssr, sxx, sst float64
		for i, x := range wlsX {
			r := wlsY[i] - b0 - b1*x
			ssr += wt[i] * r * r
			sxx += wt[i] * (x - xm) * (x - xm)
			sst += wt[i] * (wlsY[i] - ym) * (wlsY[i] - ym)
		}
		s := math.Sqrt(ssr / 4)
		for _, c := range []struct {
			name      string
			got, want float64
		}{
			{"b1", f.Coef[1], b1},
			{"b0", f.Coef[0], b0},
			{"s_w", f.ResidualSD, s},
			{"SE b1", f.SE[1], s / math.Sqrt(sxx)},
			{"SE b0", f.SE[0], s * math.Sqrt(1/sw+xm*xm/sxx)},
			{"R2", f.R2, 1 - ssr/sst},
			{"SSreg", f.SSReg, sst - ssr},
			{"F", f.F, (sst - ssr) / (ssr / 4)},
		} {
			if d := digits(c.got, c.want); d < 11 {
				t.Errorf("w = %s: %s = %.15g, closed form %.15g (%.1f digits)", w, c.name, c.got, c.want, d)
			}
		}
		for i, x := range wlsX {
			// Residuals are unweighted; accuracy is the back-calculated
			// amount (y − b0)/b1 over the nominal, ×100 (common practice).
			if r := wlsY[i] - b0 - b1*x; math.Abs(f.Residuals[i]-r) > 1e-12 {
				t.Errorf("w = %s: residual %d = %g, want %g", w, i, f.Residuals[i], r)
			}
			if acc := 100 * (wlsY[i] - b0) / b1 / x; math.Abs(f.Accuracy[i]-acc) > 1e-9 {
				t.Errorf("w = %s: accuracy %d = %.12g, want %.12g", w, i, f.Accuracy[i], acc)
			}
		}
	}
}

// TestWeightScaleInvariance: rescaling every weight by one constant leaves
// b0, b1 and their standard errors unchanged and scales s by the square
// root of the constant (check-values.md §7 [M, standard formulas]).
func TestWeightScaleInvariance(t *testing.T) {
	x := mat.NewDense(len(wlsX), 2, nil)
	sw := make([]float64, len(wlsX))
	for i, v := range wlsX {
		x.SetRow(i, []float64{1, v})
		sw[i] = 1 / v
	}
	ref, err := regress(x, wlsY, sw, true)
	if err != nil {
		t.Fatal(err)
	}
	for _, c := range []float64{1e-150, 3, 1e150} {
		scaled := make([]float64, len(sw))
		for i := range sw {
			scaled[i] = sw[i] * math.Sqrt(c)
		}
		got, err := regress(x, wlsY, scaled, true)
		if err != nil {
			t.Fatal(err)
		}
		for j := range 2 {
			if digits(got.coef[j], ref.coef[j]) < 14 || digits(got.se[j], ref.se[j]) < 14 {
				t.Errorf("weights ×%g: b%d = %g ± %g, want %g ± %g", c, j, got.coef[j], got.se[j], ref.coef[j], ref.se[j])
			}
		}
		if d := digits(got.s, ref.s*math.Sqrt(c)); d < 14 {
			t.Errorf("weights ×%g: s = %g, want %g", c, got.s, ref.s*math.Sqrt(c))
		}
	}
}

func TestAmountRoundTrip(t *testing.T) {
	// Exact synthetic curves: reading the curve backwards must return the
	// amount put in (definition of the inverse).
	levels := []float64{0.5, 1, 2, 5, 10, 20}
	for _, tc := range []struct {
		m     Model
		w     Weighting
		curve func(x float64) float64
	}{
		{LinearOrigin, Unweighted, func(x float64) float64 { return 2.5 * x }},
		{Linear, InverseX, func(x float64) float64 { return 0.3 + 1.7*x }},
		{Linear, Unweighted, func(x float64) float64 { return 40 - 1.5*x }}, // falling
		{Quadratic, InverseXSquared, func(x float64) float64 { return 0.1 + 2*x - 0.04*x*x }},
		{Quadratic, Unweighted, func(x float64) float64 { return -0.2 + 0.5*x + 0.01*x*x }},
	} {
		y := make([]float64, len(levels))
		for i, x := range levels {
			y[i] = tc.curve(x)
		}
		f, err := FitCurve(levels, y, tc.m, tc.w)
		if err != nil {
			t.Fatal(tc.m, err)
		}
		if f.XMin != 0.5 || f.XMax != 20 {
			t.Errorf("%s: range [%g, %g], want [0.5, 20]", tc.m, f.XMin, f.XMax)
		}
		for i := range f.Accuracy {
			if math.Abs(f.Accuracy[i]-100) > 1e-9 {
				t.Errorf("%s: accuracy of exact level %g = %.12g %%, want 100", tc.m, levels[i], f.Accuracy[i])
			}
		}
		for _, x := range []float64{0.5, 0.7, 3.3, 12, 20, 0.25, 21, 24} {
			got, in, err := f.Amount(f.Predict(x))
			if err != nil {
				t.Fatalf("%s: Amount(Predict(%g)): %v", tc.m, x, err)
			}
			if math.Abs(got-x) > 1e-10*max(1, x) {
				t.Errorf("%s: Amount(Predict(%g)) = %.15g", tc.m, x, got)
			}
			if want := x >= 0.5 && x <= 20; in != want {
				t.Errorf("%s: amount %g in range = %v, want %v (out of range is flagged)", tc.m, x, in, want)
			}
		}
	}
}

func TestAmountQuadraticBranch(t *testing.T) {
	// y = 10x − 0.5x² on x = 1…8: the turning point is at x = 10, so the
	// calibrated branch is x < 10. Roots by the quadratic formula (worked
	// by hand): y = 40 → 10 ± √20; y = 48 → 8 or 12; y = 49.5 → 9 or 11;
	// y = 4.5 → 0.4606… or 19.54…; y = 55 has no real root (maximum 50).
	var x, y []float64
	for v := 1.0; v <= 8; v++ {
		x = append(x, v)
		y = append(y, 10*v-0.5*v*v)
	}
	f, err := FitCurve(x, y, Quadratic, Unweighted)
	if err != nil {
		t.Fatal(err)
	}
	for _, tc := range []struct {
		response, want float64
		in             bool
	}{
		{40, 10 - math.Sqrt(20), true},
		{48, 8, true},
		{49.5, 9, false},                 // on the branch, beyond the range: flagged
		{4.5, 10 - math.Sqrt(91), false}, // below the lowest standard
	} {
		got, in, err := f.Amount(tc.response)
		if err != nil {
			t.Fatal(err)
		}
		if math.Abs(got-tc.want) > 1e-9 || in != tc.in {
			t.Errorf("Amount(%g) = %.12g, %v; want %.12g, %v", tc.response, got, in, tc.want, tc.in)
		}
	}
	if _, _, err := f.Amount(55); !errors.Is(err, ErrNoAmount) {
		t.Errorf("Amount(55) beyond the maximum: err = %v, want ErrNoAmount", err)
	}

	// A rising curve with its turning point below the range: y = x² + 4x on
	// x = 1…5 (vertex −2). y = 12 has roots 2 and −6; the branch gives 2.
	x, y = x[:0], y[:0]
	for v := 1.0; v <= 5; v++ {
		x = append(x, v)
		y = append(y, v*v+4*v)
	}
	if f, err = FitCurve(x, y, Quadratic, Unweighted); err != nil {
		t.Fatal(err)
	}
	if got, in, err := f.Amount(12); err != nil || math.Abs(got-2) > 1e-10 || !in {
		t.Errorf("Amount(12) = %g, %v, %v; want 2, true, nil", got, in, err)
	}
}

func TestFitCurveErrors(t *testing.T) {
	rising := []float64{1, 2, 3, 4, 5}
	for _, tc := range []struct {
		name string
		x, y []float64
		m    Model
		w    Weighting
		want string
	}{
		{"unknown model", rising, rising, "cubic", Unweighted, "unknown model"},
		{"unknown weighting", rising, rising, Linear, "1/y", "unknown weighting"},
		{"lengths", rising, rising[:4], Linear, Unweighted, "5 amounts but 4 responses"},
		{"too few linear", []float64{1, 2}, []float64{1, 2}, Linear, Unweighted, "at least 3 calibration points"},
		{"too few quadratic", []float64{1, 2, 3}, []float64{1, 2, 3}, Quadratic, Unweighted, "at least 4 calibration points"},
		{"too few origin", []float64{1}, []float64{1}, LinearOrigin, Unweighted, "at least 2 calibration points"},
		{"NaN", []float64{1, 2, math.NaN()}, []float64{1, 2, 3}, Linear, Unweighted, "point 3"},
		{"Inf", []float64{1, 2, 3}, []float64{1, math.Inf(1), 3}, Linear, Unweighted, "not finite"},
		{"negative", []float64{-1, 2, 3}, []float64{1, 2, 3}, Linear, Unweighted, "negative amount"},
		{"zero with 1/x", []float64{0, 2, 3}, []float64{0, 2, 3}, Linear, InverseX, "needs every amount > 0"},
		{"zero with 1/x2", []float64{0, 2, 3, 4}, []float64{0, 2, 3, 4}, Quadratic, InverseXSquared, "needs every amount > 0"},
		{"all x equal", []float64{2, 2, 2, 2}, []float64{1, 2, 3, 4}, Linear, Unweighted, "at least 2 distinct amounts, got 1"},
		{"two levels quadratic", []float64{1, 1, 2, 2}, []float64{1, 1, 2, 2}, Quadratic, Unweighted, "at least 3 distinct amounts, got 2"},
		{"origin all zero", []float64{0, 0, 0}, []float64{1, 2, 3}, LinearOrigin, Unweighted, "non-zero amount"},
		{"all y equal", rising, []float64{7, 7, 7, 7, 7}, Linear, Unweighted, "all responses are equal"},
		{"flat slope", []float64{1, 2, 3}, []float64{1, 2, 1}, Linear, Unweighted, "flat or turns"},
		{"turning point inside", rising, []float64{1, 4, 5, 4, 1}, Quadratic, Unweighted, "flat or turns"},
		{"near-equal amounts", []float64{1, 1 + 0x1p-52, 1, 1 + 0x1p-52}, []float64{1, 2, 3, 4}, Linear, Unweighted, "numerically singular"},
		{"overflow", []float64{1e300, 2e300, 3e300, 4e300}, []float64{1, 2, 3, 4}, Quadratic, Unweighted, "floating-point range"},
	} {
		_, err := FitCurve(tc.x, tc.y, tc.m, tc.w)
		if err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("%s: err = %v, want one containing %q", tc.name, err, tc.want)
		}
	}
}

func TestZeroLevelAccuracy(t *testing.T) {
	// A blank standard (amount 0) has no defined accuracy; the fit keeps it.
	f, err := FitCurve([]float64{0, 1, 2, 4}, []float64{0.02, 1.01, 1.98, 4.03}, Linear, Unweighted)
	if err != nil {
		t.Fatal(err)
	}
	if !math.IsNaN(f.Accuracy[0]) || math.IsNaN(f.Accuracy[1]) || f.XMin != 0 {
		t.Errorf("accuracy %v, XMin %g: want NaN for the blank only, XMin 0", f.Accuracy, f.XMin)
	}
	if _, _, err := (&Fit{}).Amount(1); !errors.Is(err, ErrNoAmount) {
		t.Errorf("Amount on an empty Fit: err = %v, want ErrNoAmount", err)
	}
	if _, _, err := f.Amount(math.NaN()); !errors.Is(err, ErrNoAmount) {
		t.Errorf("Amount(NaN): err = %v, want ErrNoAmount", err)
	}
}

func TestExactFitStatistics(t *testing.T) {
	// Points exactly on a line: the residuals vanish (to rounding), R² is 1
	// and F grows without bound, +Inf when SSRes is exactly 0 (definitions).
	f, err := FitCurve([]float64{1, 2, 3, 4}, []float64{3, 5, 7, 9}, Linear, Unweighted)
	if err != nil {
		t.Fatal(err)
	}
	if f.SSRes > 1e-24 || f.R2 < 1-1e-15 || f.F < 1e25 || f.SE[1] > 1e-12 || digits(f.Coef[1], 2) < 15 || math.Abs(f.Coef[0]-1) > 1e-14 {
		t.Errorf("exact line y = 1 + 2x: b %v, SE %v, SSRes %g, R2 %.17g, F %g", f.Coef, f.SE, f.SSRes, f.R2, f.F)
	}
}

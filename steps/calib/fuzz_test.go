package calib

import (
	"encoding/binary"
	"math"
	"testing"
)

// FuzzFitCurve: FitCurve never panics, and a fit it accepts has finite
// coefficients, standard errors and statistics (F may be +Inf for an exact
// fit), residuals for every point, and an Amount that never panics.
//
// The input is read two ways: as raw float64 bit patterns (NaN, Inf,
// subnormals, extremes), or, when the first byte is even, as small
// non-negative amounts and signed responses, which the fit mostly accepts.
func FuzzFitCurve(f *testing.F) {
	f.Add([]byte{0, 1, 10, 2, 21, 3, 29, 4, 41, 5, 52}, uint8(1), uint8(0))
	f.Add([]byte{0, 1, 10, 2, 21, 3, 29, 4, 41, 5, 52}, uint8(2), uint8(2))
	f.Add([]byte{0, 1, 10, 1, 21, 3, 29, 3, 41}, uint8(0), uint8(1))
	f.Add([]byte{2, 0, 20, 9, 0, 1, 2, 3}, uint8(2), uint8(0))
	raw := []byte{1}
	for _, v := range []float64{1, 2, 2, 4.1, 3, 5.9, 4, 8.2, 1e300, -1e-300} {
		raw = binary.LittleEndian.AppendUint64(raw, math.Float64bits(v))
	}
	f.Add(raw, uint8(1), uint8(1))
	models := []Model{LinearOrigin, Linear, Quadratic}
	weights := []Weighting{Unweighted, InverseX, InverseXSquared}
	f.Fuzz(func(t *testing.T, data []byte, model, weight uint8) {
		if len(data) == 0 || len(data) > 1+2*8*64 {
			return
		}
		var x, y []float64
		if data[0]%2 == 0 {
			for i := 1; i+1 < len(data); i += 2 {
				x = append(x, float64(data[i])/8)
				y = append(y, float64(int8(data[i+1]))/4)
			}
		} else {
			for i := 1; i+16 <= len(data); i += 16 {
				x = append(x, math.Float64frombits(binary.LittleEndian.Uint64(data[i:])))
				y = append(y, math.Float64frombits(binary.LittleEndian.Uint64(data[i+8:])))
			}
		}
		fit, err := FitCurve(x, y, models[int(model)%3], weights[int(weight)%3])
		if err != nil {
			return
		}
		finite := func(name string, v ...float64) {
			for _, e := range v {
				if math.IsNaN(e) || math.IsInf(e, 0) {
					t.Fatalf("%s not finite: %v (x %v, y %v)", name, v, x, y)
				}
			}
		}
		finite("Coef", fit.Coef...)
		finite("SE", fit.SE...)
		finite("stats", fit.ResidualSD, fit.R2, fit.SSRes, fit.SSReg, fit.XMin, fit.XMax)
		finite("Residuals", fit.Residuals...)
		if math.IsNaN(fit.F) || fit.F < 0 {
			t.Fatalf("F = %g", fit.F)
		}
		if len(fit.Residuals) != len(x) || len(fit.Accuracy) != len(x) || fit.N != len(x) || fit.DF != fit.N-fit.P {
			t.Fatalf("sizes: N %d, P %d, DF %d, %d residuals, %d accuracies for %d points", fit.N, fit.P, fit.DF, len(fit.Residuals), len(fit.Accuracy), len(x))
		}
		for _, v := range y {
			if a, _, err := fit.Amount(v); err == nil && (math.IsNaN(a) || math.IsInf(a, 0)) {
				t.Fatalf("Amount(%g) = %g without error", v, a)
			}
		}
	})
}

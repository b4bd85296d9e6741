package calib

import (
	"fmt"
	"math"
	"strings"
	"testing"
)

func TestMaxRSDTable(t *testing.T) {
	// Ph. Eur. 2.2.46 maximum permitted RSD, check-values.md §3: the
	// formula is [M], the table [D] (matches the printed table as
	// remembered). Rows B = upper limit − 100; columns n = 3, 4, 5, 6.
	table := []struct {
		upper float64
		rsd   [4]string
	}{
		{102.0, [4]string{"0.41", "0.59", "0.73", "0.85"}},
		{102.5, [4]string{"0.52", "0.74", "0.92", "1.06"}},
		{103.0, [4]string{"0.62", "0.89", "1.10", "1.27"}},
	}
	for _, row := range table {
		for j, want := range row.rsd {
			n := j + 3
			got, err := MaxRSD(row.upper, n)
			if err != nil {
				t.Fatal(err)
			}
			t.Logf("B = %.1f, n = %d: %.5f", row.upper-100, n, got)
			if s := fmt.Sprintf("%.2f", got); s != want {
				t.Errorf("MaxRSD(%g, %d) = %.5f → %s, table %s", row.upper, n, got, s, want)
			}
		}
	}
}

func TestMaxRSDSixInjections(t *testing.T) {
	// Algebra on the check-values.md §3 formula [D]: for n = 6 the t values
	// cancel, RSD_max = (0.6/√2)·B.
	for _, b := range []float64{0.5, 1.5, 2, 10} {
		got, err := MaxRSD(100+b, 6)
		if err != nil || digits(got, 0.6/math.Sqrt2*b) < 14 {
			t.Errorf("MaxRSD(%g, 6) = %.15g, %v; want %.15g", 100+b, got, err, 0.6/math.Sqrt2*b)
		}
	}
}

func TestStudentT90(t *testing.T) {
	// Two-sided 90 % t values, check-values.md §3 (t table, tolerance of
	// the 7 significant digits quoted), and K = 0.349017.
	for _, tc := range []struct {
		df   int
		want float64
	}{{2, 2.919986}, {3, 2.353363}, {4, 2.131847}, {5, 2.015048}} {
		if got := studentT90(tc.df); math.Abs(got-tc.want) > 5e-7 {
			t.Errorf("t(90 %%, %d) = %.7f, want %.6f", tc.df, got, tc.want)
		}
	}
	if k := 0.6 / math.Sqrt2 * studentT90(5) / math.Sqrt(6); math.Abs(k-0.349017) > 5e-7 {
		t.Errorf("K = %.7f, want 0.349017", k)
	}
}

func TestMaxRSDErrors(t *testing.T) {
	for _, tc := range []struct {
		upper float64
		n     int
		want  string
	}{
		{102, 1, "at least 2"},
		{100, 6, "above 100"},
		{98, 6, "above 100"},
		{math.NaN(), 6, "above 100"},
		{math.Inf(1), 6, "above 100"},
	} {
		if _, err := MaxRSD(tc.upper, tc.n); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("MaxRSD(%g, %d): err = %v, want %q", tc.upper, tc.n, err, tc.want)
		}
	}
}

func TestLODLOQ(t *testing.T) {
	// ICH Q2 example, check-values.md §7 [D], also [S] on a published LOD/LOQ
	// calculator: σ = 0.0025 AU, S = 1250 AU per µg/mL → LOD 6.6e-6 µg/mL,
	// LOQ 2.0e-5 µg/mL.
	if got := LOD(0.0025, 1250); math.Abs(got-6.6e-6) > 1e-18 {
		t.Errorf("LOD = %g, want 6.6e-6", got)
	}
	if got := LOQ(0.0025, 1250); math.Abs(got-2.0e-5) > 1e-18 {
		t.Errorf("LOQ = %g, want 2.0e-5", got)
	}
	// A falling calibration gives the same limits (ICH Q2 formulas use the
	// magnitude of the slope).
	if LOD(0.0025, -1250) != LOD(0.0025, 1250) || LOQ(0.0025, -1250) != LOQ(0.0025, 1250) {
		t.Error("LOD/LOQ depend on the sign of the slope")
	}
}

func TestSummarise(t *testing.T) {
	for _, tc := range []struct {
		name          string
		v             []float64
		mean, sd, rsd float64
	}{
		// Worked by hand: mean 100, deviations −2 … 2, Σd² = 10,
		// SD = √(10/4) = 1.5811388300841898, RSD = 1.5811388300841898 %.
		{"five areas", []float64{98, 99, 100, 101, 102}, 100, math.Sqrt(2.5), math.Sqrt(2.5)},
		// Worked by hand: mean 5, Σd² = 9+1+1+1+0+0+4+16 = 32,
		// SD = √(32/7), RSD = 20·√(32/7) %.
		{"eight values", []float64{2, 4, 4, 4, 5, 5, 7, 9}, 5, math.Sqrt(32.0 / 7), 20 * math.Sqrt(32.0/7)},
		// Worked by hand: the same deviations on a large offset must give
		// the same SD (1e9 + {−2 … 2}, exactly representable).
		{"offset", []float64{1e9 - 2, 1e9 - 1, 1e9, 1e9 + 1, 1e9 + 2}, 1e9, math.Sqrt(2.5), 100 * math.Sqrt(2.5) / 1e9},
		// Worked by hand: a negative mean, RSD on |mean|.
		{"negative", []float64{-4, -6}, -5, math.Sqrt2, 100 * math.Sqrt2 / 5},
	} {
		st, err := Summarise(tc.v)
		if err != nil {
			t.Fatal(tc.name, err)
		}
		if st.N != len(tc.v) || digits(st.Mean, tc.mean) < 15 || digits(st.SD, tc.sd) < 14 || digits(st.RSD, tc.rsd) < 14 {
			t.Errorf("%s: %+v, want mean %g, SD %.15g, RSD %.15g", tc.name, st, tc.mean, tc.sd, tc.rsd)
		}
	}
	for _, tc := range []struct {
		v    []float64
		want string
	}{
		{nil, "at least 2"},
		{[]float64{1}, "at least 2"},
		{[]float64{1, math.NaN()}, "value 2"},
		{[]float64{-1, 1}, "mean is zero"},
		{[]float64{math.MaxFloat64, math.MaxFloat64}, "overflow"},
	} {
		if _, err := Summarise(tc.v); err == nil || !strings.Contains(err.Error(), tc.want) {
			t.Errorf("Summarise(%v): err = %v, want %q", tc.v, err, tc.want)
		}
	}
}

func TestResponseFactorAndDrift(t *testing.T) {
	// Worked by hand: RF = area/amount (common practice), 1500/3 = 500.
	if rf, err := ResponseFactor(1500, 3); err != nil || rf != 500 {
		t.Errorf("ResponseFactor(1500, 3) = %g, %v; want 500", rf, err)
	}
	for _, tc := range [][2]float64{{1500, 0}, {1500, -3}, {0, 3}, {-1, 3}, {math.NaN(), 3}, {1, math.Inf(1)}} {
		if _, err := ResponseFactor(tc[0], tc[1]); err == nil {
			t.Errorf("ResponseFactor(%g, %g): no error", tc[0], tc[1])
		}
	}
	// Worked by hand: (102 − 100)/100·100 = 2 %; (98.5 − 100)/100·100 = −1.5 %.
	for _, tc := range []struct{ ref, check, want float64 }{{100, 102, 2}, {100, 98.5, -1.5}, {250, 250, 0}} {
		if d, err := Drift(tc.ref, tc.check); err != nil || math.Abs(d-tc.want) > 1e-12 {
			t.Errorf("Drift(%g, %g) = %g, %v; want %g", tc.ref, tc.check, d, err, tc.want)
		}
	}
	for _, tc := range [][2]float64{{0, 1}, {math.NaN(), 1}, {1, math.Inf(-1)}} {
		if _, err := Drift(tc[0], tc[1]); err == nil {
			t.Errorf("Drift(%g, %g): no error", tc[0], tc[1])
		}
	}
}

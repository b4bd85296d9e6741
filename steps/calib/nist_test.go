package calib

import (
	"math"
	"testing"

	"gonum.org/v1/gonum/mat"
)

// digits is the number of significant decimal digits to which got agrees
// with want: −log10 of the relative error (17 for an exact match).
func digits(got, want float64) float64 {
	if got == want {
		return 17
	}
	return -math.Log10(math.Abs(got-want) / math.Abs(want))
}

// certified is one certified value and the significant digits it must be
// reproduced to.
type certified struct {
	name      string
	got, want float64
	min       float64
}

// checkCertified reports, and fails on, values that agree to fewer digits
// than required; it logs the agreement reached.
func checkCertified(t *testing.T, set string, cs []certified) {
	t.Helper()
	for _, c := range cs {
		d := digits(c.got, c.want)
		t.Logf("%s %-6s %.15g (certified %.15g): %.1f digits", set, c.name, c.got, c.want, d)
		if d < c.min {
			t.Errorf("%s %s = %.15g, certified %.15g: %.1f digits, want ≥ %.0f", set, c.name, c.got, c.want, d, c.min)
		}
	}
}

// Norris data: NIST StRD linear regression, check-values.md §8 [S].
var (
	norrisX = []float64{0.2, 337.4, 118.2, 884.6, 10.1, 226.5, 666.3, 996.3, 448.6, 777.0, 558.2, 0.4, 0.6, 775.5, 666.9, 338.0, 447.5, 11.6, 556.0, 228.1, 995.8, 887.6, 120.2, 0.3, 0.3, 556.8, 339.1, 887.2, 999.0, 779.0, 11.1, 118.3, 229.2, 669.1, 448.9, 0.5}
	norrisY = []float64{0.1, 338.8, 118.1, 888.0, 9.2, 228.1, 668.5, 998.5, 449.1, 778.9, 559.2, 0.3, 0.1, 778.1, 668.8, 339.3, 448.9, 10.8, 557.7, 228.3, 998.0, 888.8, 119.6, 0.3, 0.6, 557.6, 339.3, 888.0, 998.5, 778.9, 10.2, 117.6, 228.9, 668.4, 449.2, 0.2}
)

func TestNISTNorris(t *testing.T) {
	f, err := FitCurve(norrisX, norrisY, Linear, Unweighted)
	if err != nil {
		t.Fatal(err)
	}
	if f.N != 36 || f.DF != 34 || f.P != 2 {
		t.Errorf("N, P, DF = %d, %d, %d; want 36, 2, 34 (check-values.md §8 [S])", f.N, f.P, f.DF)
	}
	// Certified values: NIST StRD Norris, check-values.md §8 [S].
	checkCertified(t, "Norris", []certified{
		{"B0", f.Coef[0], -0.262323073774029, 11},
		{"B1", f.Coef[1], 1.00211681802045, 13},
		{"SD B0", f.SE[0], 0.232818234301152, 13},
		{"SD B1", f.SE[1], 0.429796848199937e-03, 13},
		{"s", f.ResidualSD, 0.884796396144373, 13},
		{"R2", f.R2, 0.999993745883712, 14},
		{"SSreg", f.SSReg, 4255954.13232369, 14},
		{"SSres", f.SSRes, 26.6173985294224, 13},
		{"F", f.F, 5436385.54079785, 13},
	})
}

func TestNISTPontius(t *testing.T) {
	// Pontius data: NIST StRD, check-values.md §8 [S]; x = 150000…3000000
	// in steps of 150000, listed twice.
	y := []float64{
		.11019, .21956, .32949, .43899, .54803, .65694, .76562, .87487, .98292, 1.09146,
		1.20001, 1.30822, 1.41599, 1.52399, 1.63194, 1.73947, 1.84646, 1.95392, 2.06128, 2.16844,
		.11052, .22018, .32939, .43886, .54798, .65739, .76596, .87474, .98300, 1.09150,
		1.20004, 1.30818, 1.41613, 1.52408, 1.63159, 1.73965, 1.84696, 1.95445, 2.06177, 2.16829,
	}
	x := make([]float64, len(y))
	for i := range x {
		x[i] = float64(150000 * (i%20 + 1))
	}
	f, err := FitCurve(x, y, Quadratic, Unweighted)
	if err != nil {
		t.Fatal(err)
	}
	if f.DF != 37 {
		t.Errorf("DF = %d, want 37 (check-values.md §8 [S])", f.DF)
	}
	// Certified values: NIST StRD Pontius, check-values.md §8 [S]. The
	// residuals are 1e-4 of the responses, so the sums of squares lose
	// about four of the sixteen digits to the subtraction y − ŷ.
	checkCertified(t, "Pontius", []certified{
		{"B0", f.Coef[0], 0.673565789473684e-03, 11},
		{"B1", f.Coef[1], 0.732059160401003e-06, 13},
		{"B2", f.Coef[2], -0.316081871345029e-14, 12},
		{"SD B0", f.SE[0], 0.107938612033077e-03, 12},
		{"SD B1", f.SE[1], 0.157817399981659e-09, 12},
		{"SD B2", f.SE[2], 0.486652849992036e-16, 12},
		{"s", f.ResidualSD, 0.205177424076185e-03, 12},
		{"R2", f.R2, 0.999999900178537, 15},
		{"SSres", f.SSRes, 0.155761768796992e-05, 11},
		{"F", f.F, 185330865.995752, 11},
	})
}

func TestNISTNoIntercept(t *testing.T) {
	noInt1X := make([]float64, 11)
	noInt1Y := make([]float64, 11)
	for i := range noInt1X {
		noInt1X[i], noInt1Y[i] = float64(60+i), float64(130+i) // check-values.md §8 [S]
	}
	for _, tc := range []struct {
		set                     string
		x, y                    []float64
		df                      int
		b1, sd, s, r2, ssres, f float64
	}{
		// NIST StRD NoInt1 and NoInt2, check-values.md §8 [S]; R² uncentred
		// as NIST certifies it.
		{"NoInt1", noInt1X, noInt1Y, 10, 2.07438016528926, 0.165289256198347e-01, 3.56753034006338, 0.999365492298663, 127.272727272727, 15750.25},
		{"NoInt2", []float64{4, 5, 6}, []float64{3, 4, 4}, 2, 0.727272727272727, 0.420827318078432e-01, 0.369274472937998, 0.993348115299335, 0.272727272727273, 298.666666666667},
	} {
		f, err := FitCurve(tc.x, tc.y, LinearOrigin, Unweighted)
		if err != nil {
			t.Fatal(tc.set, err)
		}
		if f.DF != tc.df || f.P != 1 || f.Coef[0] != 0 || f.SE[0] != 0 {
			t.Errorf("%s: DF %d, P %d, b0 %g ± %g; want DF %d, P 1, b0 fixed 0", tc.set, f.DF, f.P, f.Coef[0], f.SE[0], tc.df)
		}
		checkCertified(t, tc.set, []certified{
			{"B1", f.Coef[1], tc.b1, 14},
			{"SD B1", f.SE[1], tc.sd, 14},
			{"s", f.ResidualSD, tc.s, 14},
			{"R2", f.R2, tc.r2, 15},
			{"SSres", f.SSRes, tc.ssres, 14},
			{"F", f.F, tc.f, 14},
		})
	}
	// NoInt2's slope is exactly 8/11 (check-values.md §8 [S]).
	f, err := FitCurve([]float64{4, 5, 6}, []float64{3, 4, 4}, LinearOrigin, Unweighted)
	if err != nil {
		t.Fatal(err)
	}
	if d := digits(f.Coef[1], 8.0/11); d < 15 {
		t.Errorf("NoInt2 B1 = %.17g, want 8/11 (%.1f digits)", f.Coef[1], d)
	}
}

// TestNISTLongley checks the least-squares core on a design with six
// predictors, the StRD stress test that naive normal equations fail.
func TestNISTLongley(t *testing.T) {
	// Longley data: NIST StRD linear regression (check-values.md §8 [S],
	// the data as given in the GSL test file cited there). Columns:
	// constant, x1 … x6.
	rows := [][7]float64{
		{1, 83.0, 234289, 2356, 1590, 107608, 1947},
		{1, 88.5, 259426, 2325, 1456, 108632, 1948},
		{1, 88.2, 258054, 3682, 1616, 109773, 1949},
		{1, 89.5, 284599, 3351, 1650, 110929, 1950},
		{1, 96.2, 328975, 2099, 3099, 112075, 1951},
		{1, 98.1, 346999, 1932, 3594, 113270, 1952},
		{1, 99.0, 365385, 1870, 3547, 115094, 1953},
		{1, 100.0, 363112, 3578, 3350, 116219, 1954},
		{1, 101.2, 397469, 2904, 3048, 117388, 1955},
		{1, 104.6, 419180, 2822, 2857, 118734, 1956},
		{1, 108.4, 442769, 2936, 2798, 120445, 1957},
		{1, 110.8, 444546, 4681, 2637, 121950, 1958},
		{1, 112.6, 482704, 3813, 2552, 123366, 1959},
		{1, 114.2, 502601, 3931, 2514, 125368, 1960},
		{1, 115.7, 518173, 4806, 2572, 127852, 1961},
		{1, 116.9, 554894, 4007, 2827, 130081, 1962},
	}
	y := []float64{60323, 61122, 60171, 61187, 63221, 63639, 64989, 63761, 66019, 67857, 68169, 66513, 68655, 69564, 69331, 70551}
	x := mat.NewDense(len(rows), 7, nil)
	for i, r := range rows {
		x.SetRow(i, r[:])
	}
	reg, err := regress(x, y, nil, true)
	if err != nil {
		t.Fatal(err)
	}
	// Certified values: NIST StRD Longley, check-values.md §8 [S]; the
	// coefficient SDs from the same GSL test file.
	b := []float64{-3482258.63459582, 15.0618722713733, -0.358191792925910e-01, -2.02022980381683, -1.03322686717359, -0.511041056535807e-01, 1829.15146461355}
	sd := []float64{890420.383607373, 84.9149257747669, 0.334910077722432e-01, 0.488399681651699, 0.214274163161675, 0.226073200069370, 455.478499142212}
	var cs []certified
	for j := range b {
		cs = append(cs, certified{"B" + string(rune('0'+j)), reg.coef[j], b[j], 10},
			certified{"SD B" + string(rune('0'+j)), reg.se[j], sd[j], 11})
	}
	cs = append(cs,
		certified{"s", reg.s, 304.854073561965, 11},
		certified{"R2", reg.r2, 0.995479004577296, 13},
		certified{"SSres", reg.ssRes, 836424.055505915, 11},
		certified{"F", reg.f, 330.285339234588, 11},
	)
	checkCertified(t, "Longley", cs)
}

package input

import (
	"errors"
	"fmt"
	"io"
	"io/fs"
	"math"
	"os"
	"path/filepath"
	"slices"
	"strconv"
	"strings"
	"testing"
)

// rows writes n data rows: time t0+i*dt in the file's unit, rounded to ten
// decimals, and the signal of signalAt, joined by sep. Decimal points become
// commas when comma is set.
func rows(n int, t0, dt float64, sep string, comma bool) string {
	var b strings.Builder
	for i := range n {
		t := decimal(t0 + float64(i)*dt)
		s := strconv.FormatFloat(signalAt(i), 'f', -1, 64)
		if comma {
			t, s = strings.ReplaceAll(t, ".", ","), strings.ReplaceAll(s, ".", ",")
		}
		b.WriteString(t + sep + s + "\n")
	}
	return b.String()
}

// decimal writes v with at most ten decimals and no trailing zeros.
func decimal(v float64) string {
	s := strconv.FormatFloat(v, 'f', 10, 64)
	return strings.TrimSuffix(strings.TrimRight(s, "0"), ".")
}

// signalAt is a synthetic detector value for row i: a small Gaussian peak
// on a flat background.
func signalAt(i int) float64 {
	x := float64(i-10) / 3
	return math.Round((5+100*math.Exp(-x*x/2))*1000) / 1000
}

// checkTrace asserts that tr holds n points starting at t0Min with spacing
// dtMin (minutes) and the signals of signalAt.
func checkTrace(t *testing.T, tr []float64, sig []float64, n int, t0Min, dtMin float64) {
	t.Helper()
	if len(tr) != n || len(sig) != n {
		t.Fatalf("got %d times and %d signals, want %d", len(tr), len(sig), n)
	}
	for i := range n {
		want := t0Min + float64(i)*dtMin
		if math.Abs(tr[i]-want) > 1e-12*math.Max(1, math.Abs(want)) {
			t.Fatalf("time[%d] = %v min, want %v", i, tr[i], want)
		}
		if sig[i] != signalAt(i) {
			t.Fatalf("signal[%d] = %v, want %v", i, sig[i], signalAt(i))
		}
	}
}

func TestReadAccepts(t *testing.T) {
	const n = 20
	tests := []struct {
		name      string
		text      string
		opt       Options
		sep       rune
		t0, dt    float64 // expected, minutes
		unit      string
		metaOrder []string
		meta      map[string]string
	}{
		{
			name: "comma, LF, units in parentheses",
			text: "time (min),signal (pA)\n" + rows(n, 0, 0.005, ",", false),
			sep:  ',', dt: 0.005, unit: "pA",
		},
		{
			name: "byte-order mark and CRLF",
			// The UTF-8 byte-order mark is EF BB BF (Unicode Standard, from memory).
			text: "\xEF\xBB\xBFtime (min),signal (pA)\r\n" + strings.ReplaceAll(rows(n, 0, 0.005, ",", false), "\n", "\r\n"),
			sep:  ',', dt: 0.005, unit: "pA",
		},
		{
			name: "tab, units in brackets, seconds to minutes",
			// 1 min = 60 s (SI, common practice).
			text: "Time [s]\tFID [mV]\n" + rows(n, 0, 0.3, "\t", false),
			sep:  '\t', dt: 0.3 / 60, unit: "mV",
		},
		{
			name: "semicolon with decimal comma",
			text: "time (min);signal (pA)\n" + rows(n, 1.25, 0.125, ";", true),
			sep:  ';', t0: 1.25, dt: 0.125, unit: "pA",
		},
		{
			name: "semicolon with decimal point",
			text: "time (min);signal (pA)\n" + rows(n, 0, 0.125, ";", false),
			sep:  ';', dt: 0.125, unit: "pA",
		},
		{
			name: "metadata, comments and blank lines",
			text: "# Sample ID: LOT-7 \n#  Injection time : 2024-05-06T09:41:00Z\n# a plain comment\n\n" +
				"#Operator:\n \ntime (min),signal (pA)\n\n" + rows(n, 0, 0.01, ",", false) + "\n\n",
			sep: ',', dt: 0.01, unit: "pA",
			metaOrder: []string{"sample_id", "injection_time", "operator"},
			meta:      map[string]string{"sample_id": "LOT-7", "injection_time": "2024-05-06T09:41:00Z", "operator": ""},
		},
		{
			name: "extra columns picked by name",
			text: "oven (C),Time (min),detector (pA),flow\n" + func() string {
				var b strings.Builder
				for i := range n {
					fmt.Fprintf(&b, "40,%s,%s,1.2\n", strconv.FormatFloat(float64(i)*0.02, 'f', -1, 64), strconv.FormatFloat(signalAt(i), 'f', -1, 64))
				}
				return b.String()
			}(),
			opt: Options{TimeColumn: "time", SignalColumn: "Detector (pA)"},
			sep: ',', dt: 0.02, unit: "pA",
		},
		{
			name: "no units in the header: options give them",
			// 1 s = 1000 ms, 1 min = 60 s (SI, common practice).
			text: "t,y\n" + rows(n, 0, 200, ",", false),
			opt:  Options{TimeUnit: "ms", SignalUnit: "mV"},
			sep:  ',', dt: 200.0 / 60000, unit: "mV",
		},
		{
			name: "header unit wins over the options",
			// 1 h = 60 min (common practice).
			text: "time (h),signal (uV)\n" + rows(n, 0, 0.001, ",", false),
			opt:  Options{TimeUnit: "s", SignalUnit: "mV"},
			sep:  ',', dt: 0.06, unit: "uV",
		},
		{
			name: "spelt-out unit, any case",
			text: "time (Minutes),signal\n" + rows(n, 0, 0.01, ",", false),
			sep:  ',', dt: 0.01,
		},
		{
			name: "SEC and spaces around cells",
			text: "time [SEC] , signal [pA] \n" + strings.ReplaceAll(rows(n, 0, 1.5, " ,  ", false), "\n", "  \n"),
			sep:  ',', dt: 1.5 / 60, unit: "pA",
		},
		{
			name: "negative start, no final line end",
			text: "time (min),signal\n" + strings.TrimSuffix(rows(n, -0.5, 0.25, ",", false), "\n"),
			sep:  ',', t0: -0.5, dt: 0.25,
		},
		{
			name: "trailing separator gives an empty extra column",
			text: "time (min),signal (pA),\n" + strings.ReplaceAll(rows(n, 0, 0.005, ",", false), "\n", ",\n"),
			sep:  ',', dt: 0.005, unit: "pA",
		},
		{
			name: "separator priority: tab over semicolon and comma",
			text: "time (min)\tsignal; FID, front (pA)\n" + rows(n, 0, 0.005, "\t", false),
			sep:  '\t', dt: 0.005, unit: "pA",
		},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			d, err := Read(strings.NewReader(tc.text), "run.csv", tc.opt)
			if err != nil {
				t.Fatal(err)
			}
			if d.Separator != tc.sep {
				t.Errorf("separator %q, want %q", d.Separator, tc.sep)
			}
			if d.Trace.SignalUnit != tc.unit {
				t.Errorf("signal unit %q, want %q", d.Trace.SignalUnit, tc.unit)
			}
			checkTrace(t, d.Trace.Time, d.Trace.Signal, n, tc.t0, tc.dt)
			if !slices.Equal(d.MetaOrder, tc.metaOrder) {
				t.Errorf("meta order %q, want %q", d.MetaOrder, tc.metaOrder)
			}
			if len(d.Meta) != len(tc.meta) {
				t.Errorf("meta %q, want %q", d.Meta, tc.meta)
			}
			for k, v := range tc.meta {
				if d.Meta[k] != v {
					t.Errorf("meta[%q] = %q, want %q", k, d.Meta[k], v)
				}
			}
			if err := traceInvariants(d, 16, 0.01); err != nil {
				t.Error(err)
			}
		})
	}
}

func TestReadRejects(t *testing.T) {
	good := rows(20, 0, 0.01, ",", false)
	head := "time (min),signal (pA)\n"
	// uneven: row 8 (line 9 with the header on line 1) is 0.0105 min after
	// row 7 instead of 0.01, a 5 % deviation.
	uneven := strings.Replace(good, "0.08,", "0.0805,", 1)
	// a missing row: 0.05 is left out, so one interval is twice the others.
	gap := strings.Replace(good, "0.05,"+strconv.FormatFloat(signalAt(5), 'f', -1, 64)+"\n", "", 1)
	long := strings.Repeat("x", 200)
	tests := []struct {
		name string
		text string
		opt  Options
		line int    // 0: none; -1: some data line
		msg  string // the message holds every one of these, separated by "|"
	}{
		{name: "empty", text: "", msg: "the file is empty"},
		{name: "byte-order mark only", text: "\xEF\xBB\xBF", msg: "the file is empty"},
		{name: "blank lines only", text: "\n \r\n\t\n", msg: "only blank lines"},
		{name: "metadata only", text: "# sample: 1\n# note\n", msg: "no header line"},
		{name: "header only", text: "\n" + head, msg: "no data rows after the header on line 2"},
		{name: "NUL bytes", text: "\x00\x01\x02\x03,\x00\n1,2\n", line: 1, msg: "not a delimited text chromatogram"},
		{name: "invalid UTF-8 header", text: "tim\xffe,signal\n" + good, line: 1, msg: "not a delimited text chromatogram"},
		{name: "invalid UTF-8 metadata", text: "# a: \xfe\xfe\n" + head + good, line: 1, msg: "not a delimited text chromatogram"},
		// The UTF-16 little-endian byte-order mark is FF FE (Unicode Standard, from memory).
		{name: "UTF-16", text: "\xFF\xFEt\x00i\x00", msg: "UTF-16|save it as UTF-8"},
		{name: "header without separator", text: "# x: 1\ntime signal\n0 1\n", line: 2, msg: `"time signal"|no tab, semicolon or comma`},
		{name: "numbers instead of a header", text: good, line: 1, msg: "found numbers|add a header"},
		{name: "bare CR line ends", text: strings.ReplaceAll(head+good, "\n", "\r"), line: 1, msg: "carriage return|LF or CRLF"},
		{name: "duplicate metadata key", text: "# Sample ID: a\n# note\n# sample-id: b\n" + head + good, line: 3, msg: `"sample_id" repeats the key on line 1`},
		{name: "metadata key empty", text: "# : a\n" + head + good, line: 1, msg: "no key before the colon"},
		{name: "unknown time unit", text: "\n" + "time (fortnights),signal\n" + good, line: 2, msg: `unknown time unit "fortnights"|column 1 "time (fortnights)"|use min, s, ms or h`},
		{name: "empty time unit", text: "time (),signal\n" + good, line: 1, msg: `unknown time unit ""`},
		{name: "unknown time unit in options", text: "t,s\n" + good, opt: Options{TimeUnit: "days"}, msg: `reader options: unknown time unit "days"`},
		{name: "negative tolerance", text: head + good, opt: Options{SpacingTolerance: -0.1}, msg: "spacing tolerance"},
		{name: "NaN tolerance", text: head + good, opt: Options{SpacingTolerance: math.NaN()}, msg: "spacing tolerance"},
		{name: "minimum points below 2", text: head + good, opt: Options{MinPoints: 1}, msg: "at least 2"},
		{name: "negative size limit", text: head + good, opt: Options{MaxBytes: -1}, msg: "size limit -1 is negative"},
		{name: "absent column", text: "time (min),FID (pA),oven\n" + good, opt: Options{SignalColumn: "TCD"}, line: 1,
			msg: `no signal column "TCD" in the header; its columns are "time (min)", "FID (pA)", "oven"`},
		{name: "absent time column", text: head + good, opt: Options{TimeColumn: "retention"}, line: 1,
			msg: `no time column "retention" in the header; its columns are "time (min)", "signal (pA)"`},
		{name: "ambiguous column", text: "time (min),FID (pA),FID (mV)\n" + good, opt: Options{SignalColumn: "fid"}, line: 1,
			msg: `ambiguous|column 2 "FID (pA)"|column 3 "FID (mV)"`},
		{name: "same column twice", text: head + good, opt: Options{SignalColumn: "time"}, line: 1, msg: "time and signal are both column 1"},
		{name: "NaN signal", text: head + good + "0.2,NaN\n", line: 22, msg: "signal is NaN; only finite numbers are accepted"},
		{name: "infinite time", text: head + "0,1\n+Inf,2\n", line: 3, msg: "time is +Inf; only finite numbers are accepted"},
		{name: "negative infinite signal", text: head + "0,-infinity\n", line: 2, msg: "signal is -Inf; only finite numbers are accepted"},
		{name: "overflowing number", text: head + "0,1e400\n", line: 2, msg: "signal 1e400 is out of range"},
		{name: "not a number", text: head + good + "0.2,12..5\n", line: 22, msg: `the signal cell "12..5" is not a number (column 2 "signal (pA)")`},
		{name: "long cell is truncated", text: head + "0," + long + "\n", line: 2, msg: `"` + long[:40] + `..." is not a number`},
		{name: "long cell is truncated between characters", text: head + "0," + strings.Repeat("€", 30) + "\n", line: 2,
			msg: `"` + strings.Repeat("€", 13) + `..." is not a number`},
		{name: "empty cell", text: head + "0, \n", line: 2, msg: `the signal cell is empty (column 2 "signal (pA)")`},
		{name: "too few cells", text: head + "0,1\n0.01\n", line: 3, msg: "the row has 1 cell separated by commas but the signal is in column 2"},
		{name: "row with the wrong separator", text: "time (min)\tsignal (pA)\n0;1\n", line: 2, msg: "1 cell separated by tabs"},
		{name: "too few cells with semicolons", text: "time (min);signal (pA)\n0;1\n0,1\n", line: 3, msg: "1 cell separated by semicolons"},
		{name: "too few cells for a time column on the right", text: "signal,x,time\n1,2,0\n1,2\n", opt: Options{TimeColumn: "time", SignalColumn: "signal"}, line: 3,
			msg: "has 2 cells|the time is in column 3"},
		{name: "decimal comma with tab separator", text: "time (min)\tsignal\n0,5\t1\n", line: 2, msg: `the time cell "0,5" is not a number`},
		{name: "comment after the header", text: head + "0,1\n# sample: 2\n", line: 3, msg: "metadata and comments belong above the header"},
		{name: "decreasing time", text: head + "0,1\n0.01,1\n\n0.005,1\n", line: 5, msg: "time 0.005 is not greater than the time 0.01 on line 3"},
		{name: "repeated time", text: head + "0,1\n0.01,1\n0.010,1\n", line: 4, msg: "time 0.010 is not greater than the time 0.01 on line 3"},
		{name: "uneven spacing", text: head + uneven, line: 10,
			msg: "interval from time 0.07 (line 9) to 0.0805 is 0.0105 min|mean interval is 0.01 min|by 1 %;|evenly spaced"},
		// 19 rows over 0.19 min: mean interval 0.19/18 min; every 0.01 min
		// interval is 5 % off it, the gap 89 %.
		{name: "missing row", text: "# a: 1\n" + head + gap, line: 4,
			msg: "interval from time 0 (line 3) to 0.01 is 0.01 min|mean interval is 0.0105556 min|largest deviation is at line 8"},
		{name: "missing row with a looser tolerance", text: head + gap, opt: Options{SpacingTolerance: 0.5}, line: 7,
			msg: "interval from time 0.04 (line 6) to 0.06 is 0.02 min|by 50 %;"},
		{name: "uneven spacing in seconds", text: "time (s),signal\n" + strings.Replace(rows(20, 0, 0.5, ",", false), "\n4,", "\n4.1,", 1), line: 10,
			msg: "interval from time 3.5 (line 9) to 4.1 is 0.6 s but the mean interval is 0.5 s"},
		{name: "too few points", text: head + rows(10, 0, 0.01, ",", false), msg: "only 10 data rows; at least 16 are needed"},
		{name: "too few points for a higher minimum", text: head + good, opt: Options{MinPoints: 21}, msg: "only 20 data rows; at least 21"},
		// 4e306 h is 2.4e308 min, beyond the largest float64, about 1.8e308
		// (IEEE 754 binary64, common practice).
		{name: "time too large in minutes", text: "time (h),signal\n" + rows(16, 0, 2e306, ",", false), line: 4,
			msg: "time 4000000000000000|... h is too large to express in minutes"},
		// From -9.75e307 to 9.75e307 the span exceeds the largest float64, about
		// 1.8e308 (IEEE 754 binary64, common practice).
		{name: "time axis too long", text: head + func() string {
			var b strings.Builder
			for i := range 16 {
				fmt.Fprintf(&b, "%g,1\n", (float64(i)-7.5)*1.3e307)
			}
			return b.String()
		}(), msg: "spans more than a float64 can hold"},
		{name: "times collapse in minutes", text: "time (s),signal\n" + func() string {
			// Neighbouring float64 values near 1.9 differ by 2^-52 (IEEE 754
			// binary64, common practice); divided by 60 they fall below
			// half the spacing of float64 values near 1.9/60, so some round
			// to the same number of minutes.
			var b strings.Builder
			x := 1.9
			for range 16 {
				fmt.Fprintf(&b, "%s,1\n", strconv.FormatFloat(x, 'g', -1, 64))
				x = math.Nextafter(x, 2)
			}
			return b.String()
		}(), line: -1, msg: "too close together to tell apart in minutes"},
	}
	for _, tc := range tests {
		t.Run(tc.name, func(t *testing.T) {
			_, err := Read(strings.NewReader(tc.text), "run.csv", tc.opt)
			t.Log(err)
			var e *Error
			if !errors.As(err, &e) {
				t.Fatalf("error %v (%T), want *Error", err, err)
			}
			if e.File != "run.csv" {
				t.Errorf("file %q", e.File)
			}
			switch {
			case tc.line < 0 && e.Line <= 2:
				t.Errorf("line %d, want a data line (%v)", e.Line, err)
			case tc.line >= 0 && e.Line != tc.line:
				t.Errorf("line %d, want %d (%v)", e.Line, tc.line, err)
			}
			for _, part := range strings.Split(tc.msg, "|") {
				if !strings.Contains(e.Msg, part) {
					t.Errorf("message %q lacks %q", e.Msg, part)
				}
			}
			s := err.Error()
			if strings.ContainsAny(s, "\r\n") {
				t.Errorf("error is not one line: %q", s)
			}
			prefix := "run.csv: "
			if e.Line != 0 {
				prefix = fmt.Sprintf("run.csv:%d: ", e.Line)
			}
			if !strings.HasPrefix(s, prefix) {
				t.Errorf("error %q does not start with %q", s, prefix)
			}
		})
	}
}

// TestReadNaNMessage checks the exact wording for a non-finite cell.
func TestReadNaNMessage(t *testing.T) {
	_, err := Read(strings.NewReader("time (min),signal (pA)\n0,1\n0.01,nan\n"), "a.csv", Options{})
	want := "a.csv:3: signal is NaN; only finite numbers are accepted"
	if err == nil || err.Error() != want {
		t.Fatalf("error %v, want %q", err, want)
	}
}

func TestReadFile(t *testing.T) {
	dir := t.TempDir()
	path := filepath.Join(dir, "run.txt")
	text := "# Lot: 42\ntime [s];signal [pA]\n" + rows(30, 0, 0.25, ";", true)
	if err := os.WriteFile(path, []byte(text), 0o644); err != nil {
		t.Fatal(err)
	}
	d, err := ReadFile(path, Options{})
	if err != nil {
		t.Fatal(err)
	}
	// 1 min = 60 s (SI, common practice).
	checkTrace(t, d.Trace.Time, d.Trace.Signal, 30, 0, 0.25/60)
	if d.Meta["lot"] != "42" || d.Separator != ';' {
		t.Errorf("meta %q, separator %q", d.Meta, d.Separator)
	}

	_, err = ReadFile(path, Options{MaxBytes: 100})
	var e *Error
	if !errors.As(err, &e) || !strings.Contains(e.Msg, fmt.Sprintf("is %d bytes, over the size limit of 100 bytes", len(text))) {
		t.Errorf("size limit: %v", err)
	}

	_, err = ReadFile(filepath.Join(dir, "absent.csv"), Options{})
	if !errors.As(err, &e) || !errors.Is(err, fs.ErrNotExist) || !strings.Contains(e.Msg, "cannot open the file") {
		t.Errorf("absent file: %v", err)
	}
	if strings.Count(err.Error(), "absent.csv") != 1 {
		t.Errorf("path repeated in %q", err)
	}

	_, err = ReadFile(path, Options{TimeUnit: "fortnight"})
	if !errors.As(err, &e) || e.File != path || !strings.Contains(e.Msg, "reader options") {
		t.Errorf("bad options: %v", err)
	}

	_, err = ReadFile(dir, Options{})
	if !errors.As(err, &e) || !strings.Contains(e.Msg, "is a directory") {
		t.Errorf("directory: %v", err)
	}
}

// onlyReader hides every method of a reader but Read, so that its size is
// unknown.
type onlyReader struct{ r io.Reader }

func (o onlyReader) Read(p []byte) (int, error) { return o.r.Read(p) }

// TestReadGuardsSize checks the size limit on readers of known and unknown
// size.
func TestReadGuardsSize(t *testing.T) {
	// More than the 64 KiB first read of a reader of unknown size.
	text := "time (min),signal\n" + rows(10000, 0, 0.01, ",", false)
	for _, limit := range []int64{10, int64(len(text)) - 1} {
		_, err := Read(onlyReader{strings.NewReader(text)}, "pipe", Options{MaxBytes: limit})
		want := fmt.Sprintf("pipe: is over the size limit of %d bytes", limit)
		if err == nil || !strings.HasPrefix(err.Error(), want) {
			t.Errorf("limit %d, unknown size: error %v, want %q", limit, err, want)
		}
		_, err = Read(strings.NewReader(text), "mem", Options{MaxBytes: limit})
		want = fmt.Sprintf("mem: is %d bytes, over the size limit of %d bytes", len(text), limit)
		if err == nil || !strings.HasPrefix(err.Error(), want) {
			t.Errorf("limit %d, known size: error %v, want %q", limit, err, want)
		}
	}
	for _, r := range []io.Reader{strings.NewReader(text), onlyReader{strings.NewReader(text)}} {
		if _, err := Read(r, "pipe", Options{MaxBytes: int64(len(text))}); err != nil {
			t.Errorf("file of exactly the limit: %v", err)
		}
	}
}

// failingReader fails after its text.
type failingReader struct{ r io.Reader }

func (f failingReader) Read(p []byte) (int, error) {
	n, err := f.r.Read(p)
	if err == io.EOF {
		err = errors.New("device went away")
	}
	return n, err
}

func TestReadIOError(t *testing.T) {
	_, err := Read(failingReader{strings.NewReader("time,signal\n")}, "pipe", Options{})
	want := "pipe: cannot read the file: device went away"
	if err == nil || err.Error() != want {
		t.Errorf("error %v, want %q", err, want)
	}
}

func TestNormalizeKey(t *testing.T) {
	// The normalisation rule of the format (package documentation).
	tests := []struct{ in, want string }{
		{"Sample ID", "sample_id"},
		{"Injection time", "injection_time"},
		{"  Lot   No. ", "lot_no"},
		{"__Column--Temp (°C)__", "column_temp_c"},
		{"ÄÖÜ", ""},
		{"abc123", "abc123"},
		{"", ""},
	}
	for _, tc := range tests {
		if got := NormalizeKey(tc.in); got != tc.want {
			t.Errorf("NormalizeKey(%q) = %q, want %q", tc.in, got, tc.want)
		}
	}
}

func TestErrorFormat(t *testing.T) {
	tests := []struct {
		e    Error
		want string
	}{
		{Error{File: "a.csv", Line: 12, Msg: "bad"}, "a.csv:12: bad"},
		{Error{File: "a.csv", Msg: "bad"}, "a.csv: bad"},
	}
	for _, tc := range tests {
		if got := tc.e.Error(); got != tc.want {
			t.Errorf("got %q, want %q", got, tc.want)
		}
	}
}

// traceInvariants checks what every accepted file guarantees.
func traceInvariants(d *Data, minPoints int, tol float64) error {
	tr := d.Trace
	n := len(tr.Time)
	if n != len(tr.Signal) || n < minPoints {
		return fmt.Errorf("%d times, %d signals, minimum %d", n, len(tr.Signal), minPoints)
	}
	for i := range n {
		if math.IsNaN(tr.Time[i]) || math.IsInf(tr.Time[i], 0) || math.IsNaN(tr.Signal[i]) || math.IsInf(tr.Signal[i], 0) {
			return fmt.Errorf("point %d not finite: %v, %v", i, tr.Time[i], tr.Signal[i])
		}
		if i > 0 && !(tr.Time[i] > tr.Time[i-1]) {
			return fmt.Errorf("time %d not increasing: %v after %v", i, tr.Time[i], tr.Time[i-1])
		}
	}
	mean := (tr.Time[n-1] - tr.Time[0]) / float64(n-1)
	if math.IsInf(mean, 0) {
		return fmt.Errorf("mean interval %v", mean)
	}
	for i := 1; i < n; i++ {
		if d := tr.Time[i] - tr.Time[i-1]; math.Abs(d-mean) > tol*mean {
			return fmt.Errorf("interval %d is %v, mean %v", i, d, mean)
		}
	}
	if len(d.Meta) != len(d.MetaOrder) {
		return fmt.Errorf("meta %q, order %q", d.Meta, d.MetaOrder)
	}
	for _, k := range d.MetaOrder {
		if _, ok := d.Meta[k]; !ok || NormalizeKey(k) != k || k == "" {
			return fmt.Errorf("meta key %q", k)
		}
	}
	if !strings.ContainsRune("\t;,", d.Separator) {
		return fmt.Errorf("separator %q", d.Separator)
	}
	return nil
}

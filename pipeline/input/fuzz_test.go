package input

import (
	"bytes"
	"testing"
)

// FuzzRead feeds arbitrary bytes to the reader: it must never panic, every
// error must be one *Error on one line, and every accepted file must give a
// trace that keeps the format's promises (see traceInvariants).
func FuzzRead(f *testing.F) {
	f.Add([]byte("time (min),signal (pA)\n"+rows(16, 0, 0.01, ",", false)), uint8(14))
	f.Add([]byte("\xEF\xBB\xBF# Sample ID: 7\r\n# note\r\ntime [s];FID [mV]\r\n0;1,5\r\n0,5;2\r\n1;2,5\r\n"), uint8(0))
	f.Add([]byte("t\ty\tz\n0\t1\t2\n1\t2\t3\n2\t3\t4\n"), uint8(1))
	f.Add([]byte("time (h),signal\n0,1\n1e-3,NaN\n"), uint8(0))
	f.Fuzz(func(t *testing.T, data []byte, extra uint8) {
		minPoints := 2 + int(extra%16)
		d, err := Read(bytes.NewReader(data), "fuzz.csv", Options{MinPoints: minPoints})
		if err != nil {
			e, ok := err.(*Error)
			if !ok {
				t.Fatalf("error %v is %T, want *Error", err, err)
			}
			if bytes.ContainsAny([]byte(e.Error()), "\r\n") {
				t.Fatalf("error not on one line: %q", e.Error())
			}
			return
		}
		if err := traceInvariants(d, minPoints, defaultSpacingTolerance); err != nil {
			t.Fatalf("accepted a bad trace: %v", err)
		}
	})
}

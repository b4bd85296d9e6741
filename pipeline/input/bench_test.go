package input

import (
	"bytes"
	"fmt"
	"math"
	"math/rand/v2"
	"strconv"
	"testing"
)

// benchSizes are a one-hour run at 10 Hz and a long high-rate run.
var benchSizes = []int{36_000, 1_000_000}

// synthFile writes a chromatogram of n rows sampled at 10 Hz: time in
// minutes with six decimals, signal in pA with four decimals (a few
// Gaussian peaks on a drifting baseline plus noise).
func synthFile(n int) []byte {
	rng := rand.New(rand.NewPCG(1, 2))
	var b bytes.Buffer
	b.WriteString("# sample_id: synthetic\n# detector: FID\ntime (min),signal (pA)\n")
	buf := make([]byte, 0, 64)
	for i := range n {
		t := float64(i) / 600
		s := 2 + 0.01*t + 0.05*rng.NormFloat64()
		for _, rt := range []float64{1.2, 3.1, 6.42} {
			x := (t - rt) / 0.01
			s += 150 * math.Exp(-x*x/2)
		}
		buf = strconv.AppendFloat(buf[:0], t, 'f', 6, 64)
		buf = append(buf, ',')
		buf = strconv.AppendFloat(buf, s, 'f', 4, 64)
		buf = append(buf, '\n')
		b.Write(buf)
	}
	return b.Bytes()
}

// BenchmarkRead measures the whole reader: copying the input, metadata,
// header, parsing both columns and checking the time axis.
func BenchmarkRead(b *testing.B) {
	for _, n := range benchSizes {
		data := synthFile(n)
		b.Run(fmt.Sprintf("rows=%d", n), func(b *testing.B) {
			b.SetBytes(int64(len(data)))
			b.ReportAllocs()
			for b.Loop() {
				d, err := Read(bytes.NewReader(data), "bench.csv", Options{})
				if err != nil || len(d.Trace.Time) != n {
					b.Fatal(err)
				}
			}
		})
	}
}

// BenchmarkParseOnly is the yardstick for BenchmarkRead: it only splits the
// same data into lines and cells and calls strconv.ParseFloat on both cells.
func BenchmarkParseOnly(b *testing.B) {
	for _, n := range benchSizes {
		data := synthFile(n)
		b.Run(fmt.Sprintf("rows=%d", n), func(b *testing.B) {
			b.SetBytes(int64(len(data)))
			b.ReportAllocs()
			for b.Loop() {
				sum, rows := 0.0, 0
				rest := data[bytes.Index(data, []byte("\ntime"))+1:]
				rest = rest[bytes.IndexByte(rest, '\n')+1:]
				for len(rest) > 0 {
					i := bytes.IndexByte(rest, '\n')
					line := rest[:i]
					rest = rest[i+1:]
					j := bytes.IndexByte(line, ',')
					t, err1 := strconv.ParseFloat(string(line[:j]), 64)
					s, err2 := strconv.ParseFloat(string(line[j+1:]), 64)
					if err1 != nil || err2 != nil {
						b.Fatal(err1, err2)
					}
					sum += t + s
					rows++
				}
				if rows != n || math.IsNaN(sum) {
					b.Fatal(rows)
				}
			}
		})
	}
}

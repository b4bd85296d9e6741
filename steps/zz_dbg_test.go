package steps
import ("testing";"lotgate/steps/dsp")
func BenchmarkPieces(b *testing.B){
	r := pkBenchRun(36000)
	y := r.Corrected()
	b.Run("corrected", func(b *testing.B){ for b.Loop(){ r.Corrected() } })
	b.Run("sg15", func(b *testing.B){ for b.Loop(){ dsp.SavitzkyGolay(y, 15, 2, 1, 1) } })
	b.Run("ma15", func(b *testing.B){ for b.Loop(){ dsp.MovingAverage(y, 15) } })
	b.Run("noise", func(b *testing.B){ for b.Loop(){ dsp.NoiseBlocks(y, 1200) } })
	d := &Detect{}
	b.Run("free", func(b *testing.B){ for b.Loop(){ d.freeSpans(r.Trace.Time) } })
	sl, _ := dsp.SavitzkyGolay(y, 15, 2, 1, 1)
	b.Run("cand", func(b *testing.B){ for b.Loop(){ candidates(y, sl, 7, 6, 50, 3) } })
}
func BenchmarkPlainMA(b *testing.B){
	r := pkBenchRun(36000)
	y := r.Corrected()
	for b.Loop() {
		out := make([]float64, len(y))
		var s float64
		for i := 0; i < 15; i++ { s += y[i] }
		for j := 7; j < len(y)-8; j++ { out[j] = s/15; s += y[j+8] - y[j-7] }
	}
}

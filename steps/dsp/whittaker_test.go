package dsp

import "math"

// rngSplitMix is a deterministic pseudo-random source: the splitmix64
// generator (Steele, Lea & Flood 2014, constants from memory) with the
// Box–Muller transform for normal deviates (common practice).
type rngSplitMix struct{ state uint64 }

func newRNGSplitMix(seed uint64) *rngSplitMix { return &rngSplitMix{state: seed} }

func (r *rngSplitMix) next() uint64 {
	r.state += 0x9e3779b97f4a7c15
	z := r.state
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9
	z = (z ^ (z >> 27)) * 0x94d049bb133111eb
	return z ^ (z >> 31)
}

// uniform returns a value in (0, 1].
func (r *rngSplitMix) uniform() float64 {
	return (float64(r.next()>>11) + 1) / (1 << 53)
}

// normal returns a standard normal deviate.
func (r *rngSplitMix) normal() float64 {
	return math.Sqrt(-2*math.Log(r.uniform())) * math.Cos(2*math.Pi*r.uniform())
}

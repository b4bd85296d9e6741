// Package dsp holds lotgate's numerical kernels: pure functions over
// []float64 with no knowledge of traces, files or pipelines.
//
//   - Savitzky–Golay smoothing and differentiation with least-squares edge
//     fits, and a centred moving average (savgol.go).
//   - The Whittaker smoother with a banded O(n) solver and the asymmetric
//     least squares (AsLS) baseline, with a robust clipping mode for
//     chromatograms dominated by one large peak (whittaker.go), and the
//     centring of such a baseline in the noise (centre.go).
//   - Noise estimates (noise.go) and peak figures: apex, crossings, plate
//     number, resolution, symmetry, signal-to-noise (peak.go).
//   - Peak shapes: the Gaussian, the exponentially modified Gaussian (EMG)
//     and the scaled complementary error function it needs (emg.go).
//
// All functions are deterministic and safe for concurrent use.
package dsp

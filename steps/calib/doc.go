// Package calib holds the calibration and system-suitability arithmetic of
// a release sequence: calibration curves fitted to standards and read
// backwards into amounts, limits of detection and quantitation, replicate
// statistics, the Ph. Eur. maximum permitted RSD, single-point response
// factors and the drift of check standards.
//
// Curves are fitted by weighted least squares through a QR factorisation of
// the √w-scaled design matrix (never the normal equations), after exact
// power-of-two scaling of every column, so that the results keep their
// digits on ill-conditioned data: the package reproduces the certified
// values of the NIST StRD linear-regression data sets Norris, Pontius,
// NoInt1, NoInt2 and Longley.
//
// Amounts read from a curve outside its calibrated range are flagged, never
// silently extrapolated: the caller decides what an out-of-range result
// means.
//
// All functions are pure, deterministic and safe for concurrent use.
package calib

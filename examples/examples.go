// Package examples holds lotgate's demo: an invented solvent-release scenario
// (Okkerby Solvents, Tarnmouth works, refined toluene TR-99.8) with its
// pipeline and synthetic chromatograms. The data files are made by
// examples/gen from Demo and embedded so that `lotgate demo` runs anywhere.
package examples

import "embed"

//go:generate go run ./gen

// FS holds the demo pipeline (toluene-release.hcl, revision 3), its next
// revision with a tightened limit (toluene-release-r4.hcl, for the
// change-impact walk-through), the invented works' logo (okkerby-logo.png)
// and the data (data/*.csv).
//
//go:embed toluene-release.hcl toluene-release-r4.hcl okkerby-logo.png data/*.csv
var FS embed.FS

// Pipeline is the demo pipeline's file name inside FS.
const Pipeline = "toluene-release.hcl"

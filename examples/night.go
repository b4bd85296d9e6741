package examples

import _ "embed"

// NightPipelineFile is the file name of the demo's sequence pipeline.
const NightPipelineFile = "night-release.hcl"

// NightPipeline is the demo's sequence pipeline: the demo method with a
// calibration, system-suitability gates and replicate rules, run over the
// night sequences that examples/synth generates.
//
//go:embed night-release.hcl
var NightPipeline []byte

// Command lotgate processes gas-chromatography data files through a declared
// pipeline and writes one JSON record per file, with a verdict against the
// specification limits.
//
// Exit status: 0 every file processed and every verdict pass; 1 every file
// processed but at least one verdict fail or undetermined; 2 a usage or
// pipeline error (nothing processed); 3 at least one file could not be
// processed or written (the others were).
package main

import (
	"fmt"
	"io"
	"os"
)

// Exit statuses.
const (
	exitOK       = 0
	exitVerdict  = 1
	exitUsage    = 2
	exitFileFail = 3
)

const usage = `lotgate — release solvent lots on GC results through a declared pipeline

Usage:
  lotgate run -p PIPELINE -o OUTDIR FILE...   process data files, write OUTDIR/<file>.json
  lotgate check PIPELINE...                   check pipelines and show every mistake
  lotgate batch -p PIPELINE -o OUTDIR SEQUENCE
                                              process a sequence: calibration, gates, lot verdicts
  lotgate freeze PIPELINE -o FILE.lotgate     freeze a pipeline version into one bundle file
  lotgate replay BUNDLE RECORD.json [DATA]    re-run a record's raw data, compare with the record
  lotgate replay --with BUNDLE RECORD.json... what a new pipeline version would change
  lotgate diff BUNDLE_A BUNDLE_B              list the settings two pipeline versions differ in
  lotgate demo [-o DIR]                       run the bundled demo (invented scenario)
  lotgate watch -p PIPELINE --inbox DIR -o OUTDIR
                                              process files dropped into a folder, exactly once
  lotgate ledger verify OUTDIR                check a watcher's ledger and its documents
  lotgate version                             print the version
  lotgate help [COMMAND]                      show help

Exit status: 0 all passed; 1 processed, some verdict fail or undetermined;
2 usage or pipeline error; 3 some file could not be processed or written.
`

func main() {
	os.Exit(run(os.Args[1:], os.Stdout, os.Stderr))
}

func run(args []string, stdout, stderr io.Writer) int {
	if len(args) == 0 {
		fmt.Fprint(stderr, usage)
		return exitUsage
	}
	cmd, rest := args[0], args[1:]
	switch cmd {
	case "run":
		return cmdRun(rest, stdout, stderr)
	case "check":
		return cmdCheck(rest, stdout, stderr)
	case "batch":
		return cmdBatch(rest, stdout, stderr)
	case "demo":
		return cmdDemo(rest, stdout, stderr)
	case "watch":
		return cmdWatch(rest, stdout, stderr)
	case "ledger":
		return cmdLedger(rest, stdout, stderr)
	case "freeze":
		return cmdFreeze(rest, stdout, stderr)
	case "replay":
		return cmdReplay(rest, stdout, stderr)
	case "diff":
		return cmdDiff(rest, stdout, stderr)
	case "version", "--version", "-version":
		fmt.Fprintln(stdout, "lotgate", versionString())
		return exitOK
	case "help", "-h", "--help", "-help":
		if len(rest) > 0 {
			return run([]string{rest[0], "--help"}, stdout, stderr)
		}
		fmt.Fprint(stdout, usage)
		return exitOK
	default:
		fmt.Fprintf(stderr, "lotgate: unknown command %q\n\n%s", cmd, usage)
		return exitUsage
	}
}

package main

import (
	"context"
	"fmt"
	"io"
	"io/fs"
	"os"
	"path"
	"path/filepath"

	"lotgate/examples"
	"lotgate/pipeline"
	"lotgate/reports"
)

const demoHelp = `Usage: lotgate demo [-o DIR]

Runs the bundled demo: an invented scenario (Okkerby Solvents, Tarnmouth works,
refined toluene TR-99.8) with a passing lot, a lot with an impurity over its
limit, and a blank. Copies the pipeline and data files into DIR/input and
writes a record per file into DIR, replacing the records of an earlier demo.
The demo's exit status is 0 when it ran, whatever the verdicts.

Flags:
`

func cmdDemo(args []string, stdout, stderr io.Writer) int {
	fset := newFlags("demo", demoHelp, stdout)
	out := fset.String("o", "lotgate-demo", "output folder")
	if rest, err := parse(fset, args); err != nil {
		return usageError(stderr, "demo", err)
	} else if len(rest) > 0 {
		return usageError(stderr, "demo", fmt.Errorf("unexpected argument %q", rest[0]))
	}
	inDir := filepath.Join(*out, "input")
	if err := os.MkdirAll(inDir, 0o755); err != nil {
		fmt.Fprintf(stderr, "lotgate demo: %v\n", err)
		return exitFileFail
	}
	files := []string{examples.Pipeline, "okkerby-logo.png", "toluene-release-r4.hcl"}
	data, _ := fs.Glob(examples.FS, "data/*.csv")
	files = append(files, data...)
	var copied []string
	for _, name := range files {
		b, err := examples.FS.ReadFile(name)
		if err == nil {
			dst := filepath.Join(inDir, path.Base(name))
			_, err = reports.WriteAtomic(dst, b, true)
			copied = append(copied, dst)
		}
		if err != nil {
			fmt.Fprintf(stderr, "lotgate demo: %v\n", err)
			return exitFileFail
		}
	}
	p, err := loadPipeline(copied[0])
	if err != nil {
		fmt.Fprintln(stderr, describe(err))
		return exitUsage
	}
	at, err := pipeline.RunTime()
	if err != nil {
		return usageError(stderr, "demo", err)
	}
	fmt.Fprintf(stdout, "lotgate demo: pipeline %q revision %d (%s)\ninputs in %s\n\n", p.Name, p.Revision, p.Description, inDir)
	results := processAll(context.Background(), p, copied[3:], *out, true, 2, at)
	if report(results, stdout, stderr) == exitFileFail {
		return exitFileFail
	}
	fmt.Fprintf(stdout, "\nTry: lotgate run -p %s -o OUTDIR %s\n", copied[0], filepath.Join(inDir, "*.csv"))
	return demoSequences(*out, inDir, stdout, stderr)
}
